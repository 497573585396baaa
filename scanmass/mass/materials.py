"""Sheet materials: the shipped density table, user additions and name lookup.

The table lives in ``scanmass/data/materials.toml`` (one ``[material.KEY]`` table per
material, densities in kg/m3). A user TOML file in the same format adds materials or
overrides fields of shipped ones.
"""

from __future__ import annotations

import difflib
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from importlib import resources
from os import PathLike
from pathlib import Path
from typing import Any

from scanmass.errors import MaterialError
from scanmass.readfile import parse_toml, read_toml

__all__ = ["Material", "load_materials", "find_material", "resolve_material"]

_FIELDS = {"name", "density_kg_m3", "density_range_kg_m3", "aliases", "source", "checked"}

#: Shown after the source of a density not checked against the named table.
NOT_CHECKED = "nominal, not checked against a table"


@dataclass(frozen=True)
class Material:
    """One sheet material and its density.

    ``density_u_kg_m3`` is the standard uncertainty of the density, obtained from the
    material's typical range ``[density_min_kg_m3, density_max_kg_m3]`` treated as a
    rectangular distribution: u = (max - min) / (2 sqrt 3) (GUM 4.3.7).

    References
    ----------
    JCGM 100:2008, Evaluation of measurement data -- Guide to the expression of
    uncertainty in measurement (GUM), clause 4.3.7.
    """

    key: str
    name: str
    density_kg_m3: float
    density_u_kg_m3: float
    density_min_kg_m3: float
    density_max_kg_m3: float
    aliases: tuple[str, ...] = field(default_factory=tuple)
    source: str = ""
    checked: bool = False

    @property
    def source_text(self) -> str:
        """The source as people read it: the named publication, and whether the value was checked."""
        if self.checked and self.source:
            return self.source
        return f"{self.source}; {NOT_CHECKED}" if self.source else NOT_CHECKED

    @property
    def density_g_mm3(self) -> float:
        """Nominal density in g/mm3 (1 kg/m3 = 1e-6 g/mm3)."""
        return self.density_kg_m3 * 1e-6

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready values."""
        return {
            "key": self.key,
            "name": self.name,
            "density_kg_m3": self.density_kg_m3,
            "density_u_kg_m3": self.density_u_kg_m3,
            "density_min_kg_m3": self.density_min_kg_m3,
            "density_max_kg_m3": self.density_max_kg_m3,
            "aliases": list(self.aliases),
            "source": self.source,
            "checked": self.checked,
        }


#: Plausible densities of a plate material, kg/m3 (from aerogels to beyond osmium, 22 590).
MIN_DENSITY_KG_M3 = 0.1
MAX_DENSITY_KG_M3 = 1e5


def _norm(text: str) -> str:
    """Lookup form of a name: lower case, only letters, digits and dots, US spellings folded."""
    s = re.sub(r"[^a-z0-9.]", "", str(text).casefold())
    return s.replace("aluminum", "aluminium").replace("fiber", "fibre")


def _read_toml(path: Path | None) -> dict[str, Any]:
    if path is None:
        text = resources.files("scanmass.mass").joinpath("data/materials.toml").read_text(encoding="utf-8")
        return parse_toml(text, error=MaterialError, path=None)
    # regular files only, read no further than their size: a FIFO or /dev/zero is refused
    return read_toml(path, error=MaterialError, what="materials file (UTF-8 TOML, given to --materials)")


def _build(key: str, entry: Mapping[str, Any], where: str | None) -> Material:
    """Validate one ``[material.KEY]`` table and return the Material."""
    unknown = set(entry) - _FIELDS
    if unknown:
        raise MaterialError(
            f"material {key!r}: unknown field(s) {', '.join(sorted(unknown))}; allowed fields are {', '.join(sorted(_FIELDS))}",
            path=where,
        )
    missing = {"density_kg_m3"} - set(entry)
    if missing:
        raise MaterialError(f"material {key!r} has no density_kg_m3; add the nominal density in kg/m3", path=where)
    try:
        rho = float(entry["density_kg_m3"])
        lo, hi = (float(v) for v in entry.get("density_range_kg_m3", (rho, rho)))
    except (TypeError, ValueError):
        raise MaterialError(
            f"material {key!r}: density_kg_m3 must be a number and density_range_kg_m3 a pair [low, high] in kg/m3",
            path=where,
        ) from None
    if not (math.isfinite(rho) and rho > 0 and math.isfinite(lo) and math.isfinite(hi)):
        raise MaterialError(
            f"material {key!r}: density must be a positive number of kg/m3, got {entry['density_kg_m3']!r}", path=where
        )
    if not (MIN_DENSITY_KG_M3 <= lo and hi <= MAX_DENSITY_KG_M3):
        raise MaterialError(
            f"material {key!r}: density {rho:g} kg/m3 (range [{lo:g}, {hi:g}]) is outside {MIN_DENSITY_KG_M3:g} to "
            f"{MAX_DENSITY_KG_M3:g} kg/m3; give the density in kg/m3 (steel is about 7850)",
            path=where,
        )
    if not lo <= rho <= hi:
        raise MaterialError(
            f"material {key!r}: nominal density {rho:g} kg/m3 lies outside its range [{lo:g}, {hi:g}]; fix density_range_kg_m3",
            path=where,
        )
    aliases = entry.get("aliases", [])
    if not isinstance(aliases, list) or not all(isinstance(a, str) for a in aliases):
        raise MaterialError(f"material {key!r}: aliases must be a list of strings", path=where)
    return Material(
        key=key,
        name=str(entry.get("name", key)),
        density_kg_m3=rho,
        density_u_kg_m3=(hi - lo) / (2.0 * math.sqrt(3.0)),
        density_min_kg_m3=lo,
        density_max_kg_m3=hi,
        aliases=tuple(aliases),
        source=str(entry.get("source", "")),
        checked=bool(entry.get("checked", False)),
    )


def load_materials(
    extra: str | PathLike[str] | Sequence[str | PathLike[str]] | None = None,
    *,
    base: Mapping[str, Material] | None = None,
) -> dict[str, Material]:
    """Read the shipped material table, plus optional user TOML files.

    Parameters
    ----------
    extra : path or sequence of paths, optional
        TOML files in the shipped format (``[material.KEY]`` tables), read in order. A
        KEY that exists already updates only the fields the later file sets; a new KEY
        must give at least ``density_kg_m3``.
    base : mapping, optional
        Start from this table instead of the shipped one.

    Returns
    -------
    dict[str, Material]
        Materials by key, shipped ones first.

    Raises
    ------
    MaterialError
        The file is missing, not TOML, or a material's data are invalid.

    Examples
    --------
    >>> table = load_materials()
    >>> table["carbon-steel"].density_kg_m3
    7850.0
    """
    raw: dict[str, dict[str, Any]] = {}
    origin: dict[str, str | None] = {}  # file of each key's last definition, for messages
    if extra is None:
        extras: list[Path] = []
    elif isinstance(extra, (str, PathLike)):
        extras = [Path(extra)]
    else:
        extras = [Path(e) for e in extra]
    if base is not None:
        for key, mat in base.items():
            raw[key] = {
                "name": mat.name,
                "density_kg_m3": mat.density_kg_m3,
                "density_range_kg_m3": [mat.density_min_kg_m3, mat.density_max_kg_m3],
                "aliases": list(mat.aliases),
                "source": mat.source,
                "checked": mat.checked,
            }
            origin[key] = None
    for path in extras if base is not None else [None, *extras]:
        doc = _read_toml(path)
        where = None if path is None else str(path)
        unknown = set(doc) - {"material"}
        if unknown or not isinstance(doc.get("material", {}), dict):
            raise MaterialError(
                f"unexpected top-level key(s) {', '.join(sorted(unknown)) or 'material'}; "
                "write one [material.KEY] table per material",
                path=where,
            )
        for key, entry in doc.get("material", {}).items():
            if not isinstance(entry, dict):
                raise MaterialError(
                    f"material {key!r} is not a table; write [material.{key}] with its fields", path=where
                )
            raw[key] = {**raw.get(key, {}), **entry}
            origin[key] = where
    return {key: _build(key, entry, origin[key]) for key, entry in raw.items()}


def find_material(name: str, table: Mapping[str, Material] | None = None) -> Material:
    """Look a material up by key, name or alias, ignoring case, spaces and hyphens.

    Parameters
    ----------
    name : str
        For example ``"aluminium-6061"``, ``"6061"``, ``"Stainless 304"``.
    table : mapping, optional
        From :func:`load_materials`; the shipped table when omitted.

    Raises
    ------
    MaterialError
        Unknown or ambiguous name; the message lists close names.

    Examples
    --------
    >>> find_material("Aluminum 6061").key
    'aluminium-6061'
    """
    if table is None:
        table = load_materials()
    want = _norm(name)
    if not want:
        raise MaterialError("no material given; pass a material name (run 'scanmass materials' to list them)")
    index: dict[str, set[str]] = {}
    for key, mat in table.items():
        for label in (key, mat.name, *mat.aliases):
            index.setdefault(_norm(label), set()).add(key)
    hits = index.get(want, set())
    if len(hits) == 1:
        return table[next(iter(hits))]
    if len(hits) > 1:
        raise MaterialError(f"material {name!r} is ambiguous ({', '.join(sorted(hits))}); pass one of these keys")
    close = sorted(label for label in index if want in label)
    close += [m for m in difflib.get_close_matches(want, list(index), n=6, cutoff=0.6) if m not in close]
    keys: list[str] = []
    for label in close:
        for key in sorted(index[label]):
            if key not in keys:
                keys.append(key)
    hint = f"close names: {', '.join(keys[:6])}" if keys else "no close names"
    raise MaterialError(
        f"unknown material {name!r} ({hint}); run 'scanmass materials' to list all, or add it to a materials TOML file"
    )


def resolve_material(
    material: Material | str,
    materials: Mapping[str, Material] | str | PathLike[str] | None = None,
) -> Material:
    """Return ``material`` itself, or look a name up with :func:`find_material`.

    ``materials`` is a table from :func:`load_materials`, or a user materials TOML file
    read on top of the shipped table, or None for the shipped table.
    """
    if isinstance(material, Material):
        return material
    if material is None:
        raise MaterialError("no material given; pass a material name (run 'scanmass materials' to list them)")
    table = materials if materials is None or isinstance(materials, Mapping) else load_materials(materials)
    return find_material(str(material), table)
