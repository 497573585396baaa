"""The ``scanmass`` command line: a thin typer layer over the library.

Each command parses its options, calls one library function, renders the result and
turns a :class:`~scanmass.errors.ScanmassError` into a one-line message on stderr and
exit code 1. Nothing here computes.
"""

from __future__ import annotations

import sys
from contextlib import contextmanager
from pathlib import Path
from typing import Annotated, Iterator, Optional

import typer
from rich.console import Console
from rich.markup import escape

from . import __version__
from .errors import ScanmassError

app = typer.Typer(
    name="scanmass",
    help="Geometric and mass properties of flat parts, in mm, from scans and photos, with uncertainties.",
    no_args_is_help=True,
    add_completion=False,
    context_settings={"help_option_names": ["-h", "--help"]},
    pretty_exceptions_enable=False,
)

#: Exit code for user errors (bad input, bad options); 0 is success.
EXIT_USER_ERROR = 1


def _console(stderr: bool = False) -> Console:
    # messages on stderr never wrap: an error stays one line however narrow the terminal
    return Console(stderr=stderr, highlight=False, soft_wrap=stderr)


def fail(message: str) -> None:
    """Print a one-line error to stderr and exit with :data:`EXIT_USER_ERROR`."""
    _console(stderr=True).print(f"[bold red]error:[/] {escape(message)}", markup=True, highlight=False)
    raise typer.Exit(code=EXIT_USER_ERROR)


@contextmanager
def user_errors() -> Iterator[None]:
    """Turn library errors into one-line CLI errors (no traceback)."""
    try:
        yield
    except ScanmassError as exc:
        fail(str(exc))


def _version(value: bool) -> None:
    if value:
        typer.echo(f"scanmass {__version__}")
        raise typer.Exit()


@app.callback()
def main(
    version: Annotated[bool, typer.Option("--version", callback=_version, is_eager=True, help="Show the version and exit.")] = False,
) -> None:
    """Geometric and mass properties of flat parts from scans and photos."""


# -- shared options -------------------------------------------------------------------
DpiOpt = Annotated[Optional[float], typer.Option("--dpi", help="Scanner resolution in dots per inch; overrides the file's.")]
DpiRelUOpt = Annotated[float, typer.Option("--dpi-rel-u", help="Relative standard uncertainty of the resolution (0.001 = 0.1 %).")]
LevelOpt = Annotated[float, typer.Option("--level", help="Edge position between local background (0) and part (1) levels.")]
ThresholdOpt = Annotated[Optional[float], typer.Option("--threshold", help="Manual grey threshold, 0-1 of full scale, instead of the local midpoint.")]
MinAreaOpt = Annotated[float, typer.Option("--min-area", help="Ignore specks smaller than this, mm².")]
MinHoleOpt = Annotated[Optional[float], typer.Option("--min-hole-area", help="Ignore holes smaller than this, mm² (default: --min-area).")]
KeepCutOpt = Annotated[bool, typer.Option("--keep-cut", help="Also measure parts touching the image edge (flagged as cut).")]
MaxPixelsOpt = Annotated[int, typer.Option("--max-pixels", help="Refuse images with more pixels than this (memory guard).")]
MaterialOpt = Annotated[Optional[str], typer.Option("--material", help="Material name for mass figures (see 'scanmass materials').")]
ThicknessOpt = Annotated[Optional[float], typer.Option("--thickness", help="Plate thickness, mm (for mass).")]
ThicknessTolOpt = Annotated[float, typer.Option("--thickness-tol", help="Standard uncertainty of the thickness, mm.")]
MaterialsFileOpt = Annotated[Optional[Path], typer.Option("--materials", help="TOML file adding or overriding materials.")]


@app.command()
def measure(
    image: Annotated[Path, typer.Argument(help="Image file: JPEG, PNG or TIFF.")],
    *,
    json_out: Annotated[Optional[str], typer.Option("--json", help="Write the result document (JSON); '-' for stdout.")] = None,
    csv_out: Annotated[Optional[Path], typer.Option("--csv", help="Write one CSV row per part.")] = None,
    overlay_out: Annotated[Optional[Path], typer.Option("--overlay", help="Write an overlay PNG of what was measured.")] = None,
    dpi: DpiOpt = None,
    dpi_rel_u: DpiRelUOpt = 0.001,
    level: LevelOpt = 0.5,
    threshold: ThresholdOpt = None,
    min_area: MinAreaOpt = 2.0,
    min_hole_area: MinHoleOpt = None,
    keep_cut: KeepCutOpt = False,
    max_pixels: MaxPixelsOpt = 250_000_000,
    material: MaterialOpt = None,
    thickness: ThicknessOpt = None,
    thickness_tol: ThicknessTolOpt = 0.0,
    materials: MaterialsFileOpt = None,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="Do not print the table.")] = False,
) -> None:
    """Measure every flat part in IMAGE: area, centroid, second moments, holes, uncertainties."""
    from .writers import measure_to_outputs

    with user_errors():
        result = measure_to_outputs(
            image, json_out=json_out, csv_out=csv_out, overlay_out=overlay_out,
            dpi=dpi, dpi_rel_u=dpi_rel_u, level=level, threshold=threshold, min_area_mm2=min_area,
            min_hole_area_mm2=min_hole_area, keep_cut=keep_cut, max_pixels=max_pixels, material=material,
            thickness_mm=thickness, thickness_u_mm=thickness_tol, materials_file=materials,
        )
    if json_out == "-":
        sys.stdout.write(result.document + "\n")
        return
    if not quiet:
        _print_measurement(result.measurement)
        for written in result.written:
            _console().print(f"wrote {written}")


def _print_measurement(m) -> None:
    from .tables import holes_table, measurement_table

    console = _console()
    console.print(measurement_table(m))
    holes = holes_table(m)
    if holes is not None:
        console.print(holes)
    for w in m.warnings:
        _console(stderr=True).print(f"[yellow]warning:[/] {escape(w)}", markup=True)


@app.command()
def demo(
    out: Annotated[Path, typer.Option("--out", help="Folder for the demo's results.")] = Path("scanmass-demo"),
) -> None:
    """Measure the bundled sample scans end to end and write results into OUT."""
    from .demo import run_demo

    with user_errors():
        summary = run_demo(out)
    console = _console()
    for m in summary.measurements:
        _print_measurement(m)
    for line in summary.lines:
        console.print(line)
    console.print(f"results in {summary.out_dir}")
