"""The ``scanmass`` command line: a thin typer layer over the library.

Each command parses its options, calls one library function, renders the result and
turns a :class:`~scanmass.errors.ScanmassError` into a one-line message on stderr and
exit code 1. Nothing here computes.
"""

from __future__ import annotations

import errno
import functools
import inspect
import os
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager, suppress
from pathlib import Path
from typing import Annotated, Any, Literal, NoReturn, cast

import typer
from rich.console import Console
from rich.markup import escape

from scanmass import __version__
from scanmass.errors import ScanmassError, escape_text
from scanmass.options import OPTION_NAMES, MeasureOptions, option_field

app = typer.Typer(
    name="scanmass",
    help="Geometric and mass properties of flat parts, in mm, from scans and photos, with uncertainties.",
    no_args_is_help=True,
    add_completion=False,
    context_settings={"help_option_names": ["-h", "--help"]},
    pretty_exceptions_enable=False,
    rich_markup_mode=None,  # plain click help: flags without a value show none ("<bool>" is not a value)
)

#: Exit code for user errors (bad input, bad options); 0 is success.
EXIT_USER_ERROR = 1

#: Exit code of ``balance`` when the part fails the balance grade.
EXIT_BALANCE_FAILS = 1


class _EscapingStream:
    """A text stream proxy that writes undecodable bytes of file names as ``\\xNN``.

    Paths of files whose names are not UTF-8 carry lone surrogates, which a UTF-8
    terminal or pipe refuses with UnicodeEncodeError (see scanmass.errors.escape_text).
    """

    def __init__(self, stream: Any) -> None:
        self._stream = stream

    def write(self, text: str) -> int:
        return self._stream.write(escape_text(text))

    def __getattr__(self, name: str) -> Any:
        return getattr(self._stream, name)


def _console(stderr: bool = False) -> Console:
    # messages on stderr never wrap: an error stays one line however narrow the terminal;
    # piped into a file or another program, tables get room instead of the default 80 columns
    stream = sys.stderr if stderr else sys.stdout
    width = None if stream is None or stream.isatty() else 200
    file = None if stream is None else cast(Any, _EscapingStream(stream))
    return Console(stderr=stderr, file=file, highlight=False, soft_wrap=stderr, width=width)


def fail(message: str) -> NoReturn:
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


def _write_stdout(text: str) -> None:
    """Write data to standard output; a full or closed stdout is an OutputError (one line)."""
    from scanmass.outputs.atomic import write_atomic

    write_atomic("-", text)


def run() -> None:
    """The console entry point: :data:`app`, with a full or closed standard output as a one-line error."""
    try:
        app(prog_name="scanmass")
    except OSError as exc:
        if exc.errno not in (errno.EPIPE, errno.ENOSPC, errno.EBADF, errno.EIO):
            raise
        with suppress(OSError, AttributeError, ValueError):  # keep the exit flush quiet
            devnull = os.open(os.devnull, os.O_WRONLY)
            os.dup2(devnull, sys.stdout.fileno())
        reason = "is full (no space left on the device)" if exc.errno == errno.ENOSPC else "was closed"
        with suppress(OSError, AttributeError, ValueError):
            sys.stderr.write(f"error: standard output {reason}; write the results to a file instead\n")
        sys.exit(EXIT_USER_ERROR)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"scanmass {__version__}")
        raise typer.Exit()


@app.callback()
def main(
    version: Annotated[
        bool, typer.Option("--version", callback=_version, is_eager=True, help="Show the version and exit.")
    ] = False,
) -> None:
    """Geometric and mass properties of flat parts from scans and photos."""


# -- the measuring options: flag, help text and default from MeasureOptions ------------
def _flag(name: str) -> str:
    return str(option_field(name).metadata["flag"])


def _help(name: str) -> str:
    return str(option_field(name).metadata["help"])


#: Default measuring options (each command's defaults come from here).
DEFAULTS = MeasureOptions()

DpiOpt = Annotated[float | None, typer.Option(_flag("dpi"), help=_help("dpi"))]
DpiRelUOpt = Annotated[float, typer.Option(_flag("dpi_rel_u"), help=_help("dpi_rel_u"))]
LevelOpt = Annotated[float, typer.Option(_flag("level"), help=_help("level"))]
ThresholdOpt = Annotated[float | None, typer.Option(_flag("threshold"), help=_help("threshold"))]
MinAreaOpt = Annotated[float, typer.Option(_flag("min_area_mm2"), help=_help("min_area_mm2"))]
MinHoleOpt = Annotated[float | None, typer.Option(_flag("min_hole_area_mm2"), help=_help("min_hole_area_mm2"))]
KeepCutOpt = Annotated[bool, typer.Option(_flag("keep_cut"), help=_help("keep_cut"))]
MaxPixelsOpt = Annotated[int, typer.Option(_flag("max_pixels"), help=_help("max_pixels"))]
MaterialOpt = Annotated[str | None, typer.Option(_flag("material"), help=_help("material"))]
ThicknessOpt = Annotated[float | None, typer.Option(_flag("thickness_mm"), help=_help("thickness_mm"))]
ThicknessTolOpt = Annotated[float, typer.Option(_flag("thickness_u_mm"), help=_help("thickness_u_mm"))]
MaterialsFileOpt = Annotated[Path | None, typer.Option(_flag("materials_file"), help=_help("materials_file"))]
ScaleOpt = Annotated[str, typer.Option(_flag("scale"), help=_help("scale"))]
MatOpt = Annotated[str | None, typer.Option(_flag("mat"), help=_help("mat"))]
SheetOpt = Annotated[str | None, typer.Option(_flag("sheet"), help=_help("sheet"))]
PrintedXOpt = Annotated[float | None, typer.Option(_flag("printed_x_mm"), help=_help("printed_x_mm"))]
PrintedYOpt = Annotated[float | None, typer.Option(_flag("printed_y_mm"), help=_help("printed_y_mm"))]
LensOpt = Annotated[Path | None, typer.Option(_flag("lens"), help=_help("lens"))]
EncodingOpt = Annotated[str, typer.Option(_flag("encoding"), help=_help("encoding"))]
DpiOverrideOpt = Annotated[bool, typer.Option(_flag("dpi_override"), help=_help("dpi_override"))]
SplitTouchingOpt = Annotated[bool, typer.Option(_flag("split_touching"), help=_help("split_touching"))]

UnitsOpt = Annotated[
    str,
    typer.Option(
        "--units",
        help="Units of what people read: mm or in (tables, CSV, report, drawings; DXF $INSUNITS 1 for in). "
        "The JSON stays in mm.",
    ),
]


def _check_units(units: str) -> str:
    from scanmass.names import UNITS

    if units not in UNITS:
        fail(f"--units {units!r} must be mm or in, e.g. --units in")
    return units


#: Each MeasureOptions field as a command-line parameter (its type there).
MEASURE_OPTION_PARAMS: dict[str, Any] = {
    "dpi": DpiOpt,
    "dpi_rel_u": DpiRelUOpt,
    "level": LevelOpt,
    "threshold": ThresholdOpt,
    "min_area_mm2": MinAreaOpt,
    "min_hole_area_mm2": MinHoleOpt,
    "keep_cut": KeepCutOpt,
    "max_pixels": MaxPixelsOpt,
    "material": MaterialOpt,
    "thickness_mm": ThicknessOpt,
    "thickness_u_mm": ThicknessTolOpt,
    "materials_file": MaterialsFileOpt,
    "scale": ScaleOpt,
    "mat": MatOpt,
    "sheet": SheetOpt,
    "printed_x_mm": PrintedXOpt,
    "printed_y_mm": PrintedYOpt,
    "lens": LensOpt,
    "encoding": EncodingOpt,
    "split_touching": SplitTouchingOpt,
    "dpi_override": DpiOverrideOpt,
}
assert set(MEASURE_OPTION_PARAMS) == set(OPTION_NAMES), "every measuring option needs its command-line type"


def with_measure_options(command: Callable[..., None]) -> Callable[..., None]:
    """Give a command every measuring option.

    The command's keyword-only parameter ``options: MeasureOptions`` becomes, for typer,
    one flag per :class:`~scanmass.options.MeasureOptions` field (flag, help text and
    default from the field); when the command runs, the parsed values are gathered back
    into one ``MeasureOptions``.
    """
    signature = inspect.signature(command, eval_str=True)
    params: list[inspect.Parameter] = []
    for param in signature.parameters.values():
        if param.name != "options":
            params.append(param)
            continue
        params += [
            inspect.Parameter(
                name, inspect.Parameter.KEYWORD_ONLY, default=getattr(DEFAULTS, name), annotation=annotation
            )
            for name, annotation in MEASURE_OPTION_PARAMS.items()
        ]

    @functools.wraps(command)
    def run(*args: Any, **kwargs: Any) -> None:
        options = MeasureOptions(**{name: kwargs.pop(name) for name in MEASURE_OPTION_PARAMS})
        command(*args, options=options, **kwargs)

    run.__signature__ = signature.replace(parameters=params)  # type: ignore[attr-defined]
    run.__annotations__ = {p.name: p.annotation for p in params}
    return run


@app.command()
@with_measure_options
def measure(
    images: Annotated[list[Path], typer.Argument(help="Image files: JPEG, PNG or TIFF (for a folder use 'batch').")],
    *,
    json_out: Annotated[
        str | None, typer.Option("--json", help="Write the result document (JSON, in mm); '-' for stdout.")
    ] = None,
    csv_out: Annotated[
        Path | None, typer.Option("--csv", help="Write one CSV row per part (of every image given).")
    ] = None,
    overlay_out: Annotated[
        Path | None, typer.Option("--overlay", help="Write an overlay PNG of what was measured.")
    ] = None,
    units: UnitsOpt = "mm",
    options: MeasureOptions,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="Do not print the table.")] = False,
) -> None:
    """Measure every flat part in each IMAGE: area, centroid, second moments, holes, uncertainties.

    Several images are measured one after the other; --json and --overlay name one file, so
    they take one image (for many files with one result each, use 'scanmass batch').
    """
    from scanmass.outputs.atomic import write_atomic
    from scanmass.outputs.writers import measure_to_outputs

    _check_units(units)
    for image in images:
        if image.is_dir():
            fail(f"{image} is a folder; measure a folder of images with 'scanmass batch {image} --out RESULTS'")
    if len(images) > 1 and (json_out is not None or overlay_out is not None):
        fail("--json and --overlay write one file for one image; give one image, or use 'scanmass batch' for many")
    results = []
    for image in images:
        with user_errors():
            results.append(
                measure_to_outputs(
                    image,
                    options,
                    json_out=json_out,
                    csv_out=csv_out if len(images) == 1 else None,
                    overlay_out=overlay_out,
                    units=units,
                )
            )
    if json_out == "-":
        with user_errors():
            _write_stdout(results[0].document + "\n")
        return
    written = [w for r in results for w in r.written]
    if csv_out is not None and len(images) > 1:
        lines = [r.measurement.to_csv(units).splitlines() for r in results]
        text = "\n".join([lines[0][0], *(row for rows in lines for row in rows[1:])]) + "\n"
        with user_errors():
            written.append(str(write_atomic(csv_out, text, inputs=images)))
    if "-" in (str(csv_out), str(overlay_out)):
        quiet = True  # standard output carries the data; no table in it
    if not quiet:
        for r in results:
            _print_measurement(r.measurement, units)
        for path in written:
            _console().print(f"wrote {path}")


def _print_measurement(m, units: str = "mm") -> None:
    from scanmass.cli.tables import holes_table, material_line, measurement_table, pieces_lines

    console = _console()
    console.print(measurement_table(m, units))
    for note in pieces_lines(m):
        console.print(f"note: {escape(note)}")
    holes = holes_table(m, units)
    if holes is not None:
        console.print(holes)
    line = material_line(m)
    if line is not None:
        console.print(escape(line))
    for w in m.warnings:
        _console(stderr=True).print(f"[yellow]warning:[/] {escape(w)}", markup=True)


@app.command()
def demo(
    out: Annotated[Path, typer.Option("--out", help="Folder for the demo's results.")] = Path("scanmass-demo"),
    units: UnitsOpt = "mm",
) -> None:
    """Measure the bundled sample scans end to end and write results into the folder OUT."""
    from scanmass.cli.demo import run_demo

    _check_units(units)
    with user_errors():
        summary = run_demo(out, units=units)
    console = _console()
    for m in summary.measurements:
        _print_measurement(m, units)
    for line in summary.lines:
        console.print(line)
    console.print(f"results in {summary.out_dir}")


# -- materials, assemblies, unbalance -------------------------------------------------------
JsonOutOpt = Annotated[str | None, typer.Option("--json", help="Write the result (JSON); '-' for stdout.")]


def _emit_json(json_out: str | None, text: str, inputs: list[Path]) -> None:
    """Write a JSON document to a file (atomically, never over an input) or to stdout for '-'."""
    from scanmass.outputs.atomic import write_atomic

    if json_out == "-":
        with user_errors():
            _write_stdout(text + "\n")
    elif json_out is not None:
        with user_errors():
            written = write_atomic(json_out, text + "\n", inputs=inputs)
        _console().print(f"wrote {written}")


@app.command("materials")
def list_materials(materials: MaterialsFileOpt = None) -> None:
    """List the material table: density, typical range, uncertainty and source of each."""
    from scanmass.cli.mass_tables import materials_table
    from scanmass.mass.materials import load_materials

    with user_errors():
        table = load_materials(materials)
    _console().print(materials_table(table))


@app.command()
def assemble(
    file: Annotated[
        Path,
        typer.Argument(help='Assembly TOML file: members, materials, placements (lengths in mm, or units = "in").'),
    ],
    *,
    json_out: JsonOutOpt = None,
    csv_out: Annotated[
        Path | None, typer.Option("--csv", help="Write the per-member table and the total (CSV).")
    ] = None,
    materials: MaterialsFileOpt = None,
    units: UnitsOpt = "mm",
) -> None:
    """Combine the plates listed in FILE: total mass, 3D centre of mass, inertia tensor."""
    from scanmass.cli.mass_tables import assembly_summary_table, assembly_table
    from scanmass.mass.assembly import assemble as assemble_file
    from scanmass.outputs.atomic import write_atomic

    _check_units(units)
    with user_errors():
        result = assemble_file(file, materials=materials)
        inputs = [file, *(file.parent / m.source for m in result.members)]
        if csv_out is not None:
            written = write_atomic(csv_out, result.to_csv(units), inputs=inputs)
    if json_out != "-":
        console = _console()
        console.print(assembly_table(result, units))
        console.print(assembly_summary_table(result, units))
        console.print(f"[yellow]caution:[/] {escape(result.cautions)}", markup=True)
        if csv_out is not None:
            console.print(f"wrote {written}")
    _emit_json(json_out, result.to_json(), inputs)


@app.command()
def balance(
    source: Annotated[Path, typer.Argument(help="Result JSON from 'scanmass measure --json', or an image to measure.")],
    *,
    material: MaterialOpt = None,
    thickness: Annotated[float | None, typer.Option("--thickness", help="Plate thickness, mm.")] = None,
    thickness_u: ThicknessTolOpt = DEFAULTS.thickness_u_mm,
    rpm: Annotated[float | None, typer.Option("--rpm", help="Maximum service speed, rev/min.")] = None,
    grade: Annotated[
        float | None, typer.Option("--grade", help="ISO 21940-11 balance quality grade G, mm/s (e.g. 6.3).")
    ] = None,
    bore: Annotated[
        int | None,
        typer.Option(
            "--bore-hole",
            help="Label of the hole the part spins about, as numbered in the hole table (default: the hole nearest the centroid).",
        ),
    ] = None,
    part: Annotated[
        int | None, typer.Option("--part", help="Part label (needed when the result has several parts).")
    ] = None,
    radius: Annotated[
        float | None,
        typer.Option(
            "--correction-radius",
            help="Distance from the axis to the correction hole's centre, mm (default: midway between bore and rim).",
        ),
    ] = None,
    drill: Annotated[
        float | None,
        typer.Option("--drill-diameter", help="Diameter of the drill for a blind-hole correction, mm."),
    ] = None,
    drill_step: Annotated[
        float | None, typer.Option("--drill-step", help="Round the through-hole diameter to this step, mm.")
    ] = None,
    json_out: JsonOutOpt = None,
    dpi: DpiOpt = None,
    materials: MaterialsFileOpt = None,
    units: UnitsOpt = "mm",
) -> None:
    """Static unbalance of a plate spinning about a bore, against an ISO 21940-11 grade.

    Exit status: 0 when the part passes or no speed and grade were given, or the check is
    undecided; 1 when it fails the grade (or on a user error).
    """
    from scanmass.cli.mass_tables import balance_table
    from scanmass.mass.assembly import load_measurement
    from scanmass.mass.balance import balance_measurement

    if material is None or thickness is None:
        fail("balance needs the plate's material and thickness, e.g. --material steel --thickness 3")
    with user_errors():
        result = balance_measurement(
            load_measurement(source, dpi=dpi),
            material,
            thickness,
            part=part,
            thickness_u_mm=thickness_u,
            hole=bore,
            rpm=rpm,
            grade=grade,
            correction_radius_mm=radius,
            drill_diameter_mm=drill,
            drill_step_mm=drill_step,
            materials=materials,
        )
    _check_units(units)
    if json_out != "-":
        console = _console()
        console.print(balance_table(result, units))
        console.print(f"[bold]{escape(result.verdict)}[/]", markup=True)
        for note in result.notes:
            console.print(f"note: {escape(note)}")
        console.print(f"[yellow]caution:[/] {escape(result.cautions)}", markup=True)
    _emit_json(json_out, result.to_json(), [source])
    if result.passes is False:
        raise typer.Exit(code=EXIT_BALANCE_FAILS)


# -- outline export and HTML report ------------------------------------------------------
@app.command("export")
def export_outlines(
    result: Annotated[Path, typer.Argument(help="Result JSON from 'scanmass measure --json'.")],
    *,
    dxf: Annotated[
        Path | None,
        typer.Option(
            "--dxf",
            help="Write the outlines as DXF (layers SCANMASS_OUTLINE, SCANMASS_HOLES, SCANMASS_PIECES, SCANMASS_REFERENCE), in mm or --units in.",
        ),
    ] = None,
    svg: Annotated[Path | None, typer.Option("--svg", help="Write the outlines as SVG in true mm.")] = None,
    fit_tolerance: Annotated[
        str | None,
        typer.Option(
            "--fit-tolerance",
            help="DXF: replace the measured vertices by lines and arcs within this many mm, or 'auto' (half the edge uncertainty, at most 0.02 mm).",
        ),
    ] = None,
    round_tolerance: Annotated[
        float | None,
        typer.Option(
            "--round-tolerance",
            help="DXF: holes round within this many mm become circles (default: max(0.02 mm, 1 % of the diameter, 4 u(d))).",
        ),
    ] = None,
    part: Annotated[
        list[int] | None, typer.Option("--part", help="Export only this part label (repeatable; default all).")
    ] = None,
    units: UnitsOpt = "mm",
) -> None:
    """Write the measured outlines of RESULT as DXF and/or SVG, for CAD and cutting."""
    from scanmass.outputs.export import export_dxf, export_svg

    _check_units(units)
    if dxf is None and svg is None:
        fail("nothing to write; give --dxf OUT.dxf and/or --svg OUT.svg")
    console = _console()
    with user_errors():
        if dxf is not None:
            s = export_dxf(
                result,
                dxf,
                fit_tolerance_mm=fit_tolerance,
                round_tolerance_mm=round_tolerance,
                parts=part or None,
                units=units,
            )
            console.print(
                f"wrote {s.path}: {s.parts} part(s), {s.vertices_in} -> {s.vertices_out} vertices "
                f"({s.arcs} arcs), {s.circles} hole(s) as circles"
                + (f", {s.pieces} other piece(s) of parts found in pieces (layer SCANMASS_PIECES)" if s.pieces else "")
            )
        if svg is not None:
            s = export_svg(result, svg, parts=part or None)
            console.print(
                f"wrote {s.path}: {s.parts} part(s), {s.vertices_out} vertices"
                + (f", {s.pieces} other piece(s) of parts found in pieces" if s.pieces else "")
            )


@app.command()
def report(
    results: Annotated[
        list[Path],
        typer.Argument(
            help="Result JSON files from 'scanmass measure --json' (balance and assembly JSON files are included "
            "in their own sections), or one batch output folder."
        ),
    ],
    *,
    html: Annotated[
        Path | None, typer.Option("--html", help="The HTML report to write (one self-contained file).")
    ] = None,
    overlay: Annotated[
        list[Path] | None,
        typer.Option(
            "--overlay",
            help="Overlay PNG of the result in the same position (repeatable; default: outlines drawn from the result).",
        ),
    ] = None,
    title: Annotated[str, typer.Option("--title", help="Heading of the report.")] = "scanmass measurement report",
    units: UnitsOpt = "mm",
) -> None:
    """Write one self-contained HTML report of the RESULTS (prints on A4).

    Given a batch's output folder instead, write its summary page: counts, failures, a
    sortable table of all parts and plots.
    """
    from scanmass.outputs.report import write_report

    if html is None:
        fail("give the report file to write with --html OUT.html")
    if len(results) == 1 and results[0].is_dir():
        from scanmass.batch.export import duplicate_count, summary_rows
        from scanmass.outputs.report import write_summary

        with user_errors():
            rows, failures = summary_rows(results[0])
            written = write_summary(
                rows,
                failures,
                html,
                title=title if title != "scanmass measurement report" else "scanmass batch summary",
                duplicates=duplicate_count(results[0]),
            )
        _console().print(f"wrote {written}")
        return
    from scanmass.outputs.report import read_extra

    extras = {p: read_extra(p) for p in results}
    measured = [p for p in results if extras[p] is None]
    if not measured:
        fail("no measurement result given; pass at least one JSON written by 'scanmass measure --json'")
    if overlay and len(overlay) > len(measured):
        fail(
            f"{len(overlay)} overlays for {len(measured)} result(s); give at most one --overlay per result, in the same order"
        )
    balances = [e[1] for e in extras.values() if e is not None and e[0] == "balance"]
    assemblies = [e[1] for e in extras.values() if e is not None and e[0] == "assembly"]
    with user_errors():
        written = write_report(
            measured,
            html,
            overlays=dict(enumerate(overlay or [])),
            title=title,
            units=_check_units(units),
            balances=balances,
            assemblies=assemblies,
        )
    _console().print(f"wrote {written}")


# -- batch: folders of scans into a resumable database (issue 5) --------------------------
ExportFormat = Literal["csv", "jsonl"]  # checked by the export itself

#: Exit code of a batch stopped by Ctrl-C before it finished (128 + SIGINT, common practice).
EXIT_INTERRUPTED = 130


def _batch_progress_display(console: Console, watch: bool):
    """A rich progress bar (done, failed, rate, ETA) and the callback that feeds it."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, ProgressColumn, TextColumn, TimeRemainingColumn
    from rich.text import Text

    class _Rate(ProgressColumn):
        def render(self, task) -> Text:
            speed = task.speed
            return Text("-- files/s" if not speed else f"{speed:.2f} files/s")

    bar = Progress(
        TextColumn("{task.description}"),
        BarColumn(),
        MofNCompleteColumn(),
        TextColumn("ok {task.fields[ok]}  failed {task.fields[failed]}  duplicates {task.fields[dup]}"),
        _Rate(),
        TextColumn("ETA"),
        TimeRemainingColumn(),
        console=console,
    )
    task = bar.add_task("measuring", total=None, ok=0, failed=0, dup=0)
    started: list[bool] = []

    def update(p) -> None:
        if not started:  # shown once there is something to measure (or to watch)
            if not (p.total or p.event == "idle"):
                return
            bar.start()
            started.append(True)
        what = {
            "finishing": "finishing files in flight (Ctrl-C again to abandon them)",
            "idle": "watching for new files (Ctrl-C to stop)",
        }.get(p.event, "measuring")
        bar.update(
            task,
            description=what,
            total=p.total or None,
            completed=p.processed,
            ok=p.measured,
            failed=p.failed,
            dup=p.duplicates,
        )

    return bar, update


@app.command()
@with_measure_options
def batch(
    folders: Annotated[
        list[Path], typer.Argument(help="Folders of scans, searched recursively (an image file works too).")
    ],
    *,
    out: Annotated[
        Path,
        typer.Option(
            "--out",
            help="Output folder: the database, parts.csv, failures.csv, duplicates.csv. Run the same command again to resume.",
        ),
    ],
    include: Annotated[
        list[str] | None,
        typer.Option(
            "--include",
            help="Only files matching this glob (repeatable). Without '/' it matches the file name, with '/' the path below the folder; case is ignored.",
        ),
    ] = None,
    exclude: Annotated[
        list[str] | None,
        typer.Option("--exclude", help="Skip files matching this glob (repeatable; same rules as --include)."),
    ] = None,
    workers: Annotated[
        int | None,
        typer.Option(
            "--workers",
            "-j",
            help="Worker processes (default: one per core; 0: measure in this process). With --cluster local, the number of Dask workers.",
        ),
    ] = None,
    retry_failed: Annotated[
        bool, typer.Option("--retry-failed", help="Measure again the files that failed in an earlier run.")
    ] = False,
    rehash: Annotated[
        bool,
        typer.Option(
            "--rehash", help="Read every file to check its content, even when its size and time are unchanged."
        ),
    ] = False,
    watch: Annotated[
        bool,
        typer.Option(
            "--watch", help="Keep watching the folders and measure new or changed files as they appear, until Ctrl-C."
        ),
    ] = False,
    poll: Annotated[float, typer.Option("--poll", help="Seconds between looks at the folders with --watch.")] = 5.0,
    cluster: Annotated[
        str | None,
        typer.Option(
            "--cluster",
            help="Run on a Dask cluster: tcp://HOST:PORT (its workers must reach the files by the same paths), or local:N for a local cluster of N processes. Needs the dask distributed package.",
        ),
    ] = None,
    options: MeasureOptions,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="No progress bar; only the summary.")] = False,
) -> None:
    """Measure every image under FOLDERS into a resumable database in OUT.

    A scanmass.toml in a folder overrides the measuring options for the images in it and below (keys as in the library: dpi, min_area_mm2, material, thickness_mm, ...). Files measured before with the same content and settings are skipped; failures are recorded and never stop the batch.

    Exit status: 0 when every file found was measured (or is a duplicate of one); 1 when any failed (see OUT/failures.csv) or an option is wrong; 130 when interrupted before the end (run the same command again to resume).
    """
    import signal

    from scanmass.batch.runner import run_batch

    err = _console(stderr=True)
    bar, update = (None, None) if quiet else _batch_progress_display(err, watch)

    def _term(signum, frame):  # treat SIGTERM like Ctrl-C: finish the files in flight, write the CSVs
        raise KeyboardInterrupt

    previous = signal.signal(signal.SIGTERM, _term)
    try:
        with user_errors():
            try:
                summary = run_batch(
                    folders,
                    out,
                    include=include or (),
                    exclude=exclude or (),
                    workers=workers,
                    cluster=cluster,
                    retry_failed=retry_failed,
                    rehash=rehash,
                    watch=watch,
                    poll_seconds=poll,
                    progress=update,
                    options=options,
                )
            finally:
                if bar is not None:
                    bar.stop()
    finally:
        signal.signal(signal.SIGTERM, previous)

    console = _console()
    rate = summary.files_per_second
    line = (
        f"{summary.found} file(s): {summary.measured} measured, {summary.failed} failed, "
        f"{summary.duplicates} duplicate(s), {summary.unchanged} unchanged"
    )
    if summary.vanished:
        line += f", {summary.vanished} deleted while the batch ran"
    if summary.failed_earlier:
        line += f", {summary.failed_earlier} failed before (not retried; --retry-failed)"
    line += f" in {summary.seconds:.1f} s" + (f" ({rate:.2f} files/s, {summary.backend})" if rate else "")
    console.print(line, soft_wrap=True)
    console.print(
        f"results in {escape(str(summary.out_dir))}: parts.csv, failures.csv, duplicates.csv, scanmass-batch.sqlite",
        soft_wrap=True,
    )
    for path, error in summary.failures[:10]:
        err.print(f"[red]failed:[/] {escape(error or path)}", markup=True, soft_wrap=True)
    if len(summary.failures) > 10:
        err.print(f"... and {len(summary.failures) - 10} more", markup=False)
    if summary.interrupted and not watch:
        err.print("interrupted; run the same command again to resume", markup=False)
        raise typer.Exit(code=EXIT_INTERRUPTED)
    if summary.failures:
        err.print(
            f"{len(summary.failures)} file(s) failed; see {escape(str(summary.out_dir / 'failures.csv'))}", markup=True
        )
        raise typer.Exit(code=EXIT_USER_ERROR)


@app.command("batch-export")
def batch_export(
    out_dir: Annotated[
        Path, typer.Argument(help="The output folder of 'scanmass batch' (holding scanmass-batch.sqlite).")
    ],
    *,
    csv_file: Annotated[
        str | None,
        typer.Option("--csv", help="Write one row per part (the columns of parts.csv) to this file; '-' for stdout."),
    ] = None,
    jsonl_file: Annotated[
        str | None,
        typer.Option(
            "--jsonl", help="Write one JSON object per file (its status and full result) to this file; '-' for stdout."
        ),
    ] = None,
) -> None:
    """Export a batch's results again from its database (default: CSV on standard output)."""
    from scanmass.batch.export import export_batch, iter_export

    if csv_file is not None and jsonl_file is not None:
        fail("give --csv FILE or --jsonl FILE, not both")
    format: ExportFormat = "jsonl" if jsonl_file is not None else "csv"
    out = jsonl_file if jsonl_file is not None else (csv_file or "-")
    with user_errors():
        if out == "-":
            for piece in iter_export(out_dir, format=format):
                _write_stdout(piece)
            return
        written = export_batch(out_dir, format=format, out=out)
    _console(stderr=True).print(f"wrote {escape(str(written))}", markup=False)


# -- marker mats and lens profiles for photos (issue 3) ---------------------------------
@app.command("mat")
def mat_command(
    *,
    layout: Annotated[
        str,
        typer.Option(
            "--layout",
            help="a4-portrait, a4-landscape, a3-portrait, a3-landscape, letter-portrait or letter-landscape.",
        ),
    ] = "a4-portrait",
    pdf: Annotated[
        Path | None, typer.Option("--pdf", help="Write the mat as a PDF at exact size (print at 100 %).")
    ] = None,
    png: Annotated[Path | None, typer.Option("--png", help="Write the mat as a PNG.")] = None,
    dpi: Annotated[float, typer.Option("--dpi", help="Resolution of the PNG, dots per inch.")] = 300.0,
) -> None:
    """Write a printable marker mat for photos (PDF and/or PNG), each with its layout JSON beside it."""
    from scanmass.outputs.scale_files import write_mat

    with user_errors():
        written = write_mat(layout, pdf=pdf, png=png, dpi=dpi)
    for path in written:
        _console().print(f"wrote {path}")


@app.command("lens")
def lens_command(
    photos: Annotated[list[Path], typer.Argument(help="5 or more photos of a flat marker mat from different angles.")],
    *,
    out: Annotated[
        Path | None,
        typer.Option(
            "--json", help="Lens profile JSON to write (default: calibration/lens-WxH.json, or ./ outside a checkout)."
        ),
    ] = None,
    mat: MatOpt = None,
) -> None:
    """Calibrate the camera's lens from photos of a marker mat and save a lens profile."""
    from scanmass.outputs.scale_files import save_lens_profile
    from scanmass.scale.lens import calibrate_lens, default_profile_path

    with user_errors():
        profile = calibrate_lens(photos, mat=mat)
        written = save_lens_profile(profile, out or default_profile_path(profile))
    k = profile.camera_matrix
    _console().print(
        f"focal length {k[0, 0]:.1f} x {k[1, 1]:.1f} px, centre ({k[0, 2]:.1f}, {k[1, 2]:.1f}) px, "
        f"k1 {profile.dist_coeffs[0]:+.4f}, k2 {profile.dist_coeffs[1]:+.4f}; RMS {profile.rms_px:.3f} px "
        f"over {profile.points} corners in {profile.photos} photos"
    )
    _console().print(f"wrote {written}")


# -- the bench page (issue 14) -------------------------------------------------------------
@app.command()
def serve(
    *,
    host: Annotated[
        str | None, typer.Option("--host", help="Address to listen on (default 127.0.0.1; 0.0.0.0 with --lan).")
    ] = None,
    port: Annotated[int, typer.Option("--port", help="Port (0: any free one).")] = 8350,
    lan: Annotated[
        bool,
        typer.Option("--lan", help="Listen on the local network, with an access token (printed, and as a QR code)."),
    ] = False,
    store: Annotated[
        Path, typer.Option("--store", help="Folder of the history (a batch database: batch-export and report read it).")
    ] = Path("scanmass-serve"),
    workers: Annotated[
        int | None, typer.Option("--workers", help="Worker processes that measure (default: cores - 1, at most 4).")
    ] = None,
    queue: Annotated[
        int, typer.Option("--queue", help="Jobs that may wait for a worker; beyond it uploads are asked to retry.")
    ] = 16,
    max_upload: Annotated[float, typer.Option("--max-upload", help="Largest upload, MB.")] = 50.0,
    max_pixels: MaxPixelsOpt = DEFAULTS.max_pixels,
    job_timeout: Annotated[
        float, typer.Option("--job-timeout", help="Longest one photo may measure, s; beyond it the job fails.")
    ] = 300.0,
) -> None:
    """A page for the bench: measure photos uploaded from a phone or a browser."""
    from scanmass.serve.config import ServeConfig
    from scanmass.serve.run import banner, check_free, run_server

    with user_errors():
        config = ServeConfig.build(
            store_dir=store,
            host=host,
            port=port,
            lan=lan,
            workers=workers,
            queue_size=queue,
            max_upload_mb=max_upload,
            max_pixels=max_pixels,
            job_timeout_s=job_timeout,
        )
        check_free(config)
        _console().print(banner(config), markup=False, highlight=False, soft_wrap=True)
        run_server(config)


# -- drawings and comparison with a nominal (issue 15) ------------------------------------
@app.command("drawing")
def drawing_command(
    result: Annotated[Path, typer.Argument(help="Result JSON from 'scanmass measure --json'.")],
    *,
    pdf: Annotated[Path | None, typer.Option("--pdf", help="Write the drawing sheet as PDF.")] = None,
    svg: Annotated[Path | None, typer.Option("--svg", help="Write the drawing sheet as SVG (true mm).")] = None,
    dxf: Annotated[
        Path | None, typer.Option("--dxf", help="Write the idealised outline with dimensions as DXF.")
    ] = None,
    part: Annotated[int | None, typer.Option("--part", help="Part label (needed when the result has several).")] = None,
    sheet: Annotated[
        str | None, typer.Option("--sheet", help="ISO 216 sheet: A4, A3 or A2 (default: smallest that fits).")
    ] = None,
    series: Annotated[
        str | None,
        typer.Option("--series", help="Snap hole diameters to: iso273-fine, iso273-medium, iso273-coarse, iso235."),
    ] = None,
    step: Annotated[
        str | None, typer.Option("--step", help="Round sizes to this step when within the uncertainty: mm, or 1/64in.")
    ] = None,
    datum_hole: Annotated[
        int | None, typer.Option("--datum-hole", help="Hole label that is the datum (default: lower-left corner).")
    ] = None,
    tolerance: Annotated[
        float | None,
        typer.Option("--tolerance", help="Fit tolerance in mm (default: 4 sigma of the edge, at least 0.02)."),
    ] = None,
    exact: Annotated[
        bool, typer.Option("--no-intent", help="Skip the parallel, tangent and concentric steps.")
    ] = False,
) -> None:
    """Draw a part of RESULT as a dimensioned sheet (PDF/SVG) and a DXF with dimensions."""
    from scanmass.outputs.drawing import write_drawing
    from scanmass.outputs.intent import parse_step

    with user_errors():
        s = write_drawing(
            result, pdf=pdf, svg=svg, dxf=dxf, part=part, sheet=sheet, series=series,
            step_mm=None if step is None else parse_step(step), datum_hole=datum_hole, tolerance_mm=tolerance,
            parallel=not exact, tangent=not exact, concentric=not exact,
        )  # fmt: skip
    for line in s.lines():
        _console().print(escape(line))


@app.command("compare")
def compare_command(
    measured: Annotated[Path, typer.Argument(help="Result JSON of the part to check.")],
    nominal: Annotated[
        Path, typer.Argument(help="The nominal: a DXF (mm unless $INSUNITS says otherwise) or a result JSON.")
    ],
    *,
    tolerance: Annotated[
        float | None, typer.Option("--tolerance", help="Line-profile tolerance t (zone width), mm.")
    ] = None,
    align: Annotated[str, typer.Option("--align", help="fit (rigid best fit), centroid, or none.")] = "fit",
    part: Annotated[int | None, typer.Option("--part", help="Part label in MEASURED.")] = None,
    nominal_part: Annotated[int | None, typer.Option("--nominal-part", help="Part label in a NOMINAL result.")] = None,
    png: Annotated[Path | None, typer.Option("--png", help="Write the colour-coded deviation picture (PNG).")] = None,
    svg: Annotated[Path | None, typer.Option("--svg", help="Write the deviation picture (SVG, mm).")] = None,
    html: Annotated[Path | None, typer.Option("--html", help="Write an HTML page with the comparison section.")] = None,
    json_out: JsonOutOpt = None,
) -> None:
    """Compare MEASURED with NOMINAL. Exit status: 0 pass (or no tolerance), 2 fail, 3 cannot decide, 1 error."""
    from scanmass.outputs.compare import EXIT_CODES, compare_to_outputs

    with user_errors():
        c, text, lines = compare_to_outputs(
            measured,
            nominal,
            tolerance_mm=tolerance,
            align=align,
            part=part,
            nominal_part=nominal_part,
            png=png,
            svg=svg,
            html=html,
        )
    if json_out != "-":
        for line in lines:
            _console().print(escape(line))
    _emit_json(json_out, text, [measured, nominal])
    raise typer.Exit(code=EXIT_CODES[c.verdict])
