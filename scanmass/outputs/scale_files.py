"""Files of the scale stage: printable mats (PDF, PNG, layout JSON) and lens profiles.

The scale stage computes mats and profiles; this module writes them, atomically, so that
scale never depends on the output stage.
"""

from __future__ import annotations

import io
import json
import os
from pathlib import Path

from PIL import Image

from scanmass.errors import OptionError
from scanmass.outputs.atomic import write_atomic
from scanmass.scale.lens import LensProfile
from scanmass.scale.mat import MatLayout, make_mat, mat_pdf_bytes, render_mat_png

__all__ = ["write_mat", "write_mat_pdf", "write_mat_png", "write_layout_json", "save_lens_profile"]


def write_mat_pdf(layout: MatLayout, path: str | os.PathLike) -> Path:
    """Write the mat as a PDF at exact physical size, atomically; returns the path."""
    return Path(write_atomic(path, mat_pdf_bytes(layout)))


def write_mat_png(layout: MatLayout, path: str | os.PathLike, *, dpi: float = 300.0) -> Path:
    """Write the mat as a PNG with its resolution (pHYs), atomically; returns the path."""
    img = render_mat_png(layout, dpi)
    bio = io.BytesIO()
    Image.fromarray(img).save(bio, format="PNG", dpi=(dpi, dpi), optimize=True)
    return Path(write_atomic(path, bio.getvalue()))


def write_layout_json(layout: MatLayout, path: str | os.PathLike) -> Path:
    """Write the layout JSON document, atomically; returns the path."""
    return Path(write_atomic(path, layout.to_json() + "\n"))


def write_mat(
    layout: str | MatLayout,
    *,
    pdf: str | os.PathLike | None = None,
    png: str | os.PathLike | None = None,
    dpi: float = 300.0,
) -> list[Path]:
    """Write a mat as PDF and/or PNG, each with its layout JSON beside it (same name, ``.json``).

    Returns the written paths. Raises OptionError when neither output is given or a
    layout JSON would land on the PDF or PNG itself.
    """
    mat = make_mat(layout) if isinstance(layout, str) else layout
    if pdf is None and png is None:
        raise OptionError("give an output: --pdf MAT.pdf and/or --png MAT.png")
    written = []
    for target, writer in ((pdf, lambda p: write_mat_pdf(mat, p)), (png, lambda p: write_mat_png(mat, p, dpi=dpi))):
        if target is None:
            continue
        target = Path(os.fspath(target))
        beside = target.with_suffix(".json")
        if beside == target:
            raise OptionError(f"{target} ends in .json; give the mat file a .pdf or .png name")
        written.append(writer(target))
        written.append(write_layout_json(mat, beside))
    return list(dict.fromkeys(written))


def save_lens_profile(profile: LensProfile, path: str | os.PathLike) -> Path:
    """Write a lens profile JSON atomically; returns the path."""
    return Path(write_atomic(path, json.dumps(profile.to_dict(), indent=1) + "\n"))
