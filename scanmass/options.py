"""The measuring options: one typed, documented, validated object.

:class:`MeasureOptions` holds every option of :func:`scanmass.measure`; each field
carries its help text (``field.metadata["help"]``, shown by the command line too), its
command-line flag and, where the type alone does not tell, its kind for settings files.
The validators below are the only place where option values are checked; the loader,
the scale stage, the pipeline, the command line and the batch all call them.

This module imports only the standard library and :mod:`scanmass.errors`, so the
command line's help stays quick to show.
"""

from __future__ import annotations

import difflib
import math
import numbers
import os
from collections.abc import Iterable, Mapping
from dataclasses import Field, dataclass, field, fields, replace
from typing import Any

from scanmass.errors import OptionError

__all__ = [
    "DEFAULT_DPI_REL_U",
    "DEFAULT_MAX_PIXELS",
    "MIN_DPI",
    "MAX_DPI",
    "OPTION_NAMES",
    "MeasureOptions",
    "check_dpi",
    "check_encoding",
    "check_max_pixels",
    "check_option_names",
    "check_positive",
    "option_field",
    "option_kind",
    "resolve_options",
]

#: Default relative standard uncertainty of a flatbed scanner's nominal resolution
#: (0.1 %, 1 sigma). From memory: flatbed scanners are typically specified to about
#: +-0.1 to 0.3 % along the carriage; override it with ``dpi_rel_u`` when known.
DEFAULT_DPI_REL_U = 0.001

#: Largest image (width x height) decoded unless the caller raises the limit.
DEFAULT_MAX_PIXELS = 250_000_000

#: Range of plausible resolutions, dots per inch (given by the user or stored in a file).
MIN_DPI = 1.0
MAX_DPI = 100_000.0

SCALE_METHODS = ("auto", "dpi", "mat", "sheet")


# ------------------------------------------------------------------------ validators
def _is_real(value: object) -> bool:
    """A real number that is not a bool (numpy's bool is not a ``numbers.Real``)."""
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def check_dpi(dpi: Any, *, path: str | None = None) -> tuple[float, float]:
    """Validate a resolution (a number or an (x, y) pair) and return it as two floats.

    Parameters
    ----------
    dpi : float or (float, float)
        Dots per inch, each from :data:`MIN_DPI` to :data:`MAX_DPI`.
    path : str, optional
        The file the value is for (named in the message).

    Raises
    ------
    OptionError
        Not a number or a pair of numbers, or out of range.

    Examples
    --------
    >>> check_dpi(600)
    (600.0, 600.0)
    >>> check_dpi([600, 1200])
    (600.0, 1200.0)
    """
    if isinstance(dpi, (tuple, list)):
        values = list(dpi)
    elif getattr(dpi, "ndim", 0) == 1:  # a numpy pair
        values = list(dpi.tolist())
    else:
        values = [dpi, dpi]
    ok = len(values) == 2 and all(_is_real(v) and MIN_DPI <= float(v) <= MAX_DPI for v in values)
    if not ok:  # NaN fails the range test
        raise OptionError(
            f"dpi must be a number of dots per inch from {MIN_DPI:g} to {MAX_DPI:g}, e.g. --dpi 600 (got {dpi!r})",
            path=path,
        )
    return float(values[0]), float(values[1])


def check_encoding(encoding: Any, *, path: str | None = None) -> tuple[str, float | None]:
    """Validate an encoding name: ``auto``, ``srgb``, ``linear`` or ``gamma:G`` (0.2 <= G <= 5).

    Returns the kind and, for ``gamma:G``, the exponent (linear = encoded ** G).

    Examples
    --------
    >>> check_encoding("gamma:2.2")
    ('gamma', 2.2)
    >>> check_encoding("srgb")
    ('srgb', None)
    """
    text = str(encoding).strip().lower() if isinstance(encoding, str) else ""
    if text in ("auto", "srgb", "linear"):
        return text, None
    if text.startswith("gamma:"):
        try:
            g = float(text.split(":", 1)[1])
        except ValueError:
            g = math.nan
        if math.isfinite(g) and 0.2 <= g <= 5.0:
            return "gamma", g
    raise OptionError(
        f"encoding {encoding!r} must be auto, srgb, linear or gamma:G with G from 0.2 to 5, e.g. --encoding gamma:2.2",
        path=path,
    )


def check_max_pixels(max_pixels: Any, *, path: str | None = None) -> int:
    """Validate the image-size guard: a positive whole number of pixels (``3e8`` will do)."""
    whole = isinstance(max_pixels, numbers.Integral) or (isinstance(max_pixels, float) and max_pixels.is_integer())
    if not (whole and not isinstance(max_pixels, bool) and max_pixels > 0):
        raise OptionError(
            f"max_pixels must be a positive whole number of pixels, e.g. --max-pixels 300000000 (got {max_pixels!r})",
            path=path,
        )
    return int(max_pixels)


def check_positive(
    name: str,
    value: Any,
    *,
    unit: str = "mm",
    hint: str = "",
    allow_zero: bool = False,
    path: str | None = None,
) -> float:
    """Return ``value`` as a float if it is a finite positive number, else raise OptionError.

    The message names the parameter and echoes the bad value.
    """
    if value is None:
        raise OptionError(f"{name} is missing; {hint or f'pass a positive number of {unit}'}", path=path)
    try:
        if isinstance(value, bool):
            raise TypeError
        number = float(value)
    except (TypeError, ValueError):
        raise OptionError(
            f"{name} must be a number of {unit}, got {value!r}; {hint or 'pass a positive number'}", path=path
        ) from None
    ok = math.isfinite(number) and (number >= 0 if allow_zero else number > 0)
    if not ok:
        kind = "zero or a positive number" if allow_zero else "a positive number"
        raise OptionError(
            f"{name} must be {kind} of {unit}, got {value!r}; {hint or 'pass a sensible value'}", path=path
        )
    return number


def _finite_at_least(value: Any, low: float) -> bool:
    return _is_real(value) and math.isfinite(value) and value >= low


# --------------------------------------------------------------------------- options
def _option(default: Any, help: str, flag: str, kind: str | None = None) -> Any:
    """A field of :class:`MeasureOptions` with its help text, CLI flag and settings kind."""
    metadata = {"help": help, "flag": flag}
    if kind is not None:
        metadata["kind"] = kind
    return field(default=default, metadata=metadata)


@dataclass(frozen=True)
class MeasureOptions:
    """Every option of :func:`scanmass.measure`, with its default.

    Build one with keywords (``MeasureOptions(dpi=600, min_area_mm2=5)``) and derive
    variants with :meth:`updated`; :meth:`check` validates all fields at once (the
    pipeline calls it before reading the image). Each field's help text is in
    ``dataclasses.fields(MeasureOptions)[i].metadata["help"]``; see also
    :func:`option_field`.
    """

    dpi: float | tuple[float, float] | None = _option(
        None,
        "Scanner resolution in dots per inch; overrides the file's.",
        "--dpi",
        kind="dpi",
    )
    dpi_rel_u: float = _option(
        DEFAULT_DPI_REL_U, "Relative standard uncertainty of the resolution (0.001 = 0.1 %).", "--dpi-rel-u"
    )
    level: float = _option(0.5, "Edge position between local background (0) and part (1) levels.", "--level")
    threshold: float | None = _option(
        None, "Manual grey threshold, 0-1 of full scale, instead of the local midpoint.", "--threshold"
    )
    min_area_mm2: float = _option(2.0, "Ignore specks smaller than this, mm².", "--min-area")
    min_hole_area_mm2: float | None = _option(
        None, "Ignore holes smaller than this, mm² (default: the minimum part area).", "--min-hole-area"
    )
    keep_cut: bool = _option(
        False, "Also measure parts clipped by the image edge (flagged as clipped).", "--keep-clipped"
    )
    max_pixels: int = _option(
        DEFAULT_MAX_PIXELS, "Refuse images with more pixels than this (memory guard).", "--max-pixels"
    )
    material: str | None = _option(
        None, "Material name for mass figures (see 'scanmass materials'); needs a thickness.", "--material"
    )
    thickness_mm: float | None = _option(
        None,
        "Plate thickness, mm. With --material it gives the mass; on a photo it also corrects the parallax "
        "of the part's top face above the mat. 0 declares a sheet-thin part; without it a photo's uncertainty "
        "covers the parallax of a part up to 3 mm thick, with a warning.",
        "--thickness",
    )
    thickness_u_mm: float = _option(
        0.0, "Standard uncertainty (1σ) of the thickness, mm; not a tolerance band.", "--thickness-u"
    )
    materials_file: str | os.PathLike | None = _option(
        None, "TOML file adding or overriding materials.", "--materials", kind="path"
    )
    scale: str = _option(
        "auto",
        "Scale source: auto (a given or trustworthy DPI means a scan, a sheet a plain sheet, else a marker mat), "
        "dpi, mat or sheet.",
        "--scale",
    )
    mat: Any = _option(
        None,
        "Marker mat layout name or layout JSON (default: recognised from the markers).",
        "--mat",
        kind="ref",
    )
    sheet: str | None = _option(None, "The part lies on a plain sheet of paper: a4, a3 or letter.", "--sheet")
    printed_x_mm: float | None = _option(
        None, "Your caliper reading of the printed mat's 100 mm x check bar, mm.", "--check-bar-x"
    )
    printed_y_mm: float | None = _option(
        None, "Your caliper reading of the printed mat's 100 mm y check bar, mm.", "--check-bar-y"
    )
    lens: Any = _option(
        None,
        "Lens profile JSON from 'scanmass lens' (corrects lens distortion).",
        "--lens",
        kind="ref",
    )
    encoding: str = _option(
        "auto",
        "Tone curve of the stored values: auto (the file's profile or tags; an untagged file is checked on its "
        "edges; a photo's tone curve is held in doubt), srgb, linear or gamma:G (e.g. gamma:2.2).",
        "--encoding",
    )
    split_touching: bool = _option(
        False,
        "Separate parts that touch (found as one outline with a narrow neck or a seam across it) and measure "
        "each; the cut between them adds an uncertainty term and the result names the parts split.",
        "--split-touching",
    )
    dpi_override: bool = _option(
        False,
        "Use --dpi even where it differs by more than 1 % from a trustworthy resolution stored in the file.",
        "--dpi-override",
    )

    def updated(self, **overrides: Any) -> MeasureOptions:
        """A copy with some fields changed; an unknown name raises OptionError naming the close match.

        Examples
        --------
        >>> MeasureOptions().updated(dpi=600).dpi
        600
        """
        check_option_names(overrides)
        return replace(self, **overrides) if overrides else self

    def as_dict(self) -> dict[str, Any]:
        """The fields by name (values as given, not copied)."""
        return {name: getattr(self, name) for name in OPTION_NAMES}

    def check(self, path: str | None = None) -> None:
        """Validate every field; the first problem raises :class:`OptionError` naming ``path``.

        Checks what can be checked without reading files: ranges, types, and the options
        that need each other. Names (a material, a mat layout, a sheet size) are looked
        up where they are used.
        """
        if self.dpi is not None:
            check_dpi(self.dpi, path=path)
        if not (_is_real(self.dpi_rel_u) and math.isfinite(self.dpi_rel_u) and 0 <= self.dpi_rel_u < 0.5):
            raise OptionError(
                f"dpi uncertainty {self.dpi_rel_u!r} must be a fraction in [0, 0.5), e.g. 0.001 for 0.1 %", path=path
            )
        if not (_is_real(self.level) and 0.0 < self.level < 1.0):
            raise OptionError(
                f"level {self.level!r} must lie strictly between 0 (background) and 1 (part), e.g. 0.5", path=path
            )
        if self.threshold is not None and not (_is_real(self.threshold) and 0.0 < self.threshold < 1.0):
            raise OptionError(
                f"threshold {self.threshold!r} must be a grey fraction strictly between 0 and 1, e.g. 0.5", path=path
            )
        if not _finite_at_least(self.min_area_mm2, 0.0):
            raise OptionError(
                f"minimum area {self.min_area_mm2!r} mm2 must be zero or positive, e.g. --min-area 2", path=path
            )
        if self.min_hole_area_mm2 is not None and not _finite_at_least(self.min_hole_area_mm2, 0.0):
            raise OptionError(f"minimum hole area {self.min_hole_area_mm2!r} mm2 must be zero or positive", path=path)
        check_max_pixels(self.max_pixels, path=path)
        check_encoding(self.encoding, path=path)
        if self.scale not in SCALE_METHODS:
            raise OptionError(f"scale {self.scale!r} must be one of {', '.join(SCALE_METHODS)}", path=path)
        if self.scale == "sheet" and self.sheet is None:
            raise OptionError("--scale sheet needs the paper size, e.g. --sheet a4", path=path)
        if self.material is not None and self.thickness_mm is None:  # a thickness alone lifts a photo's face
            raise OptionError(
                "mass needs both a material and a thickness, e.g. --material carbon-steel --thickness 3", path=path
            )
        if self.thickness_mm is not None:
            check_positive(
                "thickness_mm",
                self.thickness_mm,
                allow_zero=self.material is None,  # a mass needs a plate; parallax takes 0
                hint="pass the sheet thickness in mm, e.g. 2.0",
                path=path,
            )
        check_positive(
            "thickness_u_mm",
            self.thickness_u_mm,
            allow_zero=True,
            hint="pass the thickness's standard uncertainty in mm, or 0",
            path=path,
        )


#: The option names, in the order of the fields.
OPTION_NAMES: tuple[str, ...] = tuple(f.name for f in fields(MeasureOptions))

_FIELDS: dict[str, Field] = {f.name: f for f in fields(MeasureOptions)}

# The settings kind of a field from its type (``from __future__ import annotations``
# keeps the annotations as text); a field's metadata ``kind`` overrides it.
_KIND_OF_TYPE = {
    "float": "float",
    "float | None": "float",
    "int": "int",
    "bool": "bool",
    "str": "str",
    "str | None": "str",
}


def option_field(name: str) -> Field:
    """The dataclass field of one option (its ``default`` and ``metadata["help"]``, ``["flag"]``)."""
    check_option_names([name])
    return _FIELDS[name]


def option_kind(name: str) -> str:
    """How a settings file gives the option.

    ``"float"``, ``"int"``, ``"bool"``, ``"str"``; ``"dpi"`` (a number or an [x, y] pair);
    ``"path"`` (a file, relative to the settings file); ``"ref"`` (a name, or a file
    when one of that name exists).
    """
    f = option_field(name)
    return f.metadata.get("kind") or _KIND_OF_TYPE[str(f.type)]


def check_option_names(names: Iterable[str], *, what: str = "measuring option", path: str | None = None) -> None:
    """Refuse names that are not fields of :class:`MeasureOptions`, suggesting the close one.

    Examples
    --------
    >>> check_option_names(["min_area"])
    Traceback (most recent call last):
    ...
    scanmass.errors.OptionError: unknown measuring option 'min_area'; did you mean 'min_area_mm2'? known: ...
    """
    for name in names:
        if name not in _FIELDS:
            close = difflib.get_close_matches(name, OPTION_NAMES, n=1, cutoff=0.5)
            hint = f"did you mean {close[0]!r}? " if close else ""
            raise OptionError(f"unknown {what} {name!r}; {hint}known: {', '.join(OPTION_NAMES)}", path=path)


def resolve_options(options: MeasureOptions | Mapping[str, Any] | None, overrides: Mapping[str, Any]) -> MeasureOptions:
    """``options`` (or the defaults) with ``overrides`` applied, names checked.

    ``options`` may also be a mapping of option names (as a settings file gives them).
    """
    if options is None:
        base = MeasureOptions()
    elif isinstance(options, MeasureOptions):
        base = options
    elif isinstance(options, Mapping):  # e.g. from a settings file: a pair as a list
        check_option_names(options)
        values: dict[str, Any] = {k: (tuple(v) if isinstance(v, list) else v) for k, v in options.items()}
        base = MeasureOptions(**values)
    else:
        raise OptionError(
            f"options must be a MeasureOptions, not {type(options).__name__}; or pass the options by name, e.g. dpi=600"
        )
    return base.updated(**overrides)


def _fields_doc() -> str:
    lines = ["", "    Attributes", "    ----------"]
    for f in fields(MeasureOptions):
        lines.append(f"    {f.name} : {f.type}")
        lines.append(f"        {f.metadata['help']} Default {f.default!r}; command line ``{f.metadata['flag']}``.")
    return "\n".join(lines) + "\n"


MeasureOptions.__doc__ = (MeasureOptions.__doc__ or "") + _fields_doc()
