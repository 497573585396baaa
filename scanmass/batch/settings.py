"""Batch settings: the measuring options of each folder, checked, and their hash.

The measuring options are the fields of :class:`scanmass.options.MeasureOptions`; the
batch takes them from the call and from a TOML file named ``scanmass.toml`` in a folder
(keys: the field names), deeper files overriding shallower ones. A field's type (or its
``kind`` metadata) says how a settings file gives it: see
:func:`scanmass.options.option_kind`.

The settings hash is the SHA-256 of the canonical JSON (sorted keys, no spaces) of the
effective options with defaults filled in, the scanmass version, the result schema and
the SHA-256 of each file the options name (materials, mat layout, lens profile).
"""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Mapping
from dataclasses import fields
from pathlib import Path
from typing import Any

from scanmass.batch.discover import content_hash
from scanmass.errors import OptionError
from scanmass.measurement import SCHEMA
from scanmass.options import OPTION_NAMES, MeasureOptions, check_option_names, option_kind, resolve_options
from scanmass.readfile import read_toml

__all__ = [
    "SETTINGS_FILE",
    "canonical",
    "coerce_setting",
    "folder_settings",
    "measure_option_names",
    "normalise_settings",
    "option_defaults",
    "settings_hash",
    "validate_settings",
]

#: Name of the per-folder settings file.
SETTINGS_FILE = "scanmass.toml"


def measure_option_names() -> tuple[str, ...]:
    """The fields of :class:`~scanmass.options.MeasureOptions`: the valid settings keys."""
    return OPTION_NAMES


def option_defaults() -> dict[str, Any]:
    """The default of every measuring option, by name."""
    return {f.name: f.default for f in fields(MeasureOptions)}


def is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def coerce_setting(name: str, value: Any, kind: str, *, where: str | None, base: Path | None) -> Any:
    """Check one option's type; return its canonical value (floats, absolute paths).

    ``kind`` is :func:`scanmass.options.option_kind` of the option: ``"path"`` is made
    absolute against ``base`` (the settings file's folder); ``"ref"`` (a name or a file)
    likewise when such a file exists there.
    """
    if value is None:
        return value

    def bad(expect: str) -> OptionError:
        return OptionError(f"setting {name} = {value!r} must be {expect}", path=where)

    if kind == "float":
        if not is_number(value):
            raise bad("a number")
        return float(value)
    if kind == "int":
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        if not isinstance(value, int) or isinstance(value, bool):
            raise bad("a whole number")
        return value
    if kind == "bool":
        if not isinstance(value, bool):
            raise bad("true or false")
        return value
    if kind == "str":
        if not isinstance(value, str):
            raise bad("a text string")
        return value
    if kind == "path":
        if not isinstance(value, (str, os.PathLike)):
            raise bad("a file path")
        p = Path(value).expanduser()
        if not p.is_absolute() and base is not None:
            p = base / p
        return os.path.normpath(os.path.abspath(p))
    if kind == "ref":
        if not isinstance(value, (str, os.PathLike)):
            return value  # an object given by a library caller (e.g. a lens profile)
        p = Path(value).expanduser()
        if not p.is_absolute() and base is not None:
            p = base / p
        return os.path.normpath(os.path.abspath(p)) if p.is_file() else os.fspath(value)
    if kind == "dpi":
        if is_number(value):
            return float(value)
        if isinstance(value, (list, tuple)) and len(value) == 2 and all(is_number(v) for v in value):
            return [float(value[0]), float(value[1])]
        raise bad("a number of dots per inch or a pair [x, y]")
    return value


def validate_settings(options: Mapping[str, Any], where: str | None) -> None:
    """Check the effective options (defaults filled in) before any file is measured.

    :meth:`MeasureOptions.check` does the range checks; a batch also wants a thickness
    only with a material (mass figures for every file) and looks the material up now
    rather than in every file.
    """
    opts = resolve_options(options, {})
    opts.check(where)
    if (opts.material is None) != (opts.thickness_mm is None):
        raise OptionError(
            "mass needs both a material and a thickness, e.g. --material carbon-steel --thickness 3", path=where
        )
    if opts.material is not None:
        from scanmass.mass.materials import find_material, load_materials

        find_material(opts.material, load_materials(opts.materials_file))


def normalise_settings(options: Mapping[str, Any], *, where: str | None, base: Path | None) -> dict[str, Any]:
    """Type-check each option and give it its canonical value (see :func:`coerce_setting`)."""
    return {
        name: coerce_setting(name, value, option_kind(name), where=where, base=base) for name, value in options.items()
    }


def folder_settings(folder: str | os.PathLike, *, name: str = SETTINGS_FILE) -> dict[str, Any]:
    """Read the settings file of one folder (empty when there is none).

    Parameters
    ----------
    folder : path
        The folder.
    name : str
        Settings file name (default ``scanmass.toml``).

    Returns
    -------
    dict
        Keyword arguments of :func:`scanmass.measure`, type-checked; a relative
        ``materials_file`` made absolute against ``folder``.

    Raises
    ------
    OptionError
        Not valid TOML, an unknown key (the message names it and the close match), or a
        value of the wrong type.
    """
    path = Path(folder) / name
    if not os.path.lexists(path):
        return {}
    doc = read_toml(path, error=OptionError, what="settings file (UTF-8 TOML)")
    check_option_names(doc, what="setting", path=str(path))
    return normalise_settings(doc, where=str(path), base=path.parent)


def canonical(value: Any) -> str:
    return json.dumps(value, sort_keys=True, separators=(",", ":"), allow_nan=False, default=str)


def settings_hash(options: Mapping[str, Any]) -> str:
    """SHA-256 of the canonical JSON of the effective options and the scanmass version.

    Defaults are filled in first, so naming a default value explicitly gives the same
    hash as leaving it out. A materials file contributes its content hash.

    Examples
    --------
    >>> settings_hash({"min_area_mm2": 2.0}) == settings_hash({})
    True
    >>> settings_hash({"dpi": 600}) == settings_hash({"dpi": 600.0})
    True
    """
    from scanmass import __version__

    effective = {
        **normalise_settings(option_defaults(), where=None, base=None),
        **normalise_settings(options, where=None, base=None),
    }
    doc: dict[str, Any] = {"scanmass": __version__, "schema": SCHEMA, "options": effective, "files_sha256": {}}
    for name, value in effective.items():  # a materials file, mat layout or lens profile: its content counts
        if option_kind(name) in ("path", "ref") and isinstance(value, str) and os.path.isfile(value):
            try:
                doc["files_sha256"][name] = content_hash(value)
            except OSError:
                doc["files_sha256"][name] = None
    return hashlib.sha256(canonical(doc).encode("utf-8")).hexdigest()
