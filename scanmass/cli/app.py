"""The ``scanmass`` command line: a thin typer layer over the library.

Each command parses its options, calls one library function, renders the result and
turns a :class:`~scanmass.errors.ScanmassError` into a one-line message on stderr and
exit code 1. Nothing here computes.
"""

from __future__ import annotations

import functools
import inspect
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Annotated, Any, Literal, NoReturn, cast

import typer
from rich.console import Console
from rich.markup import escape

from scanmass import __version__
from scanmass.errors import ScanmassError
from scanmass.options import OPTION_NAMES, MeasureOptions, option_field

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
    image: Annotated[Path, typer.Argument(help="Image file: JPEG, PNG or TIFF.")],
    *,
    json_out: Annotated[
        str | None, typer.Option("--json", help="Write the result document (JSON); '-' for stdout.")
    ] = None,
    csv_out: Annotated[Path | None, typer.Option("--csv", help="Write one CSV row per part.")] = None,
    overlay_out: Annotated[
        Path | None, typer.Option("--overlay", help="Write an overlay PNG of what was measured.")
    ] = None,
    options: MeasureOptions,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="Do not print the table.")] = False,
) -> None:
    """Measure every flat part in IMAGE: area, centroid, second moments, holes, uncertainties."""
    from scanmass.outputs.writers import measure_to_outputs

    with user_errors():
        result = measure_to_outputs(image, options, json_out=json_out, csv_out=csv_out, overlay_out=overlay_out)
    if json_out == "-":
        sys.stdout.write(result.document + "\n")
        return
    if not quiet:
        _print_measurement(result.measurement)
        for written in result.written:
            _console().print(f"wrote {written}")


def _print_measurement(m) -> None:
    from scanmass.cli.tables import holes_table, measurement_table

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
    from scanmass.cli.demo import run_demo

    with user_errors():
        summary = run_demo(out)
    console = _console()
    for m in summary.measurements:
        _print_measurement(m)
    for line in summary.lines:
        console.print(line)
    console.print(f"results in {summary.out_dir}")


# -- materials, assemblies, unbalance -------------------------------------------------------
JsonOutOpt = Annotated[str | None, typer.Option("--json", help="Write the result (JSON); '-' for stdout.")]


def _emit_json(json_out: str | None, text: str, inputs: list[Path]) -> None:
    """Write a JSON document to a file (atomically, never over an input) or to stdout for '-'."""
    from scanmass.outputs.atomic import write_atomic

    if json_out == "-":
        sys.stdout.write(text + "\n")
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
    file: Annotated[Path, typer.Argument(help="Assembly TOML file: members, materials, placements (lengths in mm).")],
    *,
    json_out: JsonOutOpt = None,
    csv_out: Annotated[
        Path | None, typer.Option("--csv", help="Write the per-member table and the total (CSV).")
    ] = None,
    materials: MaterialsFileOpt = None,
) -> None:
    """Combine the plates listed in FILE: total mass, 3D centre of mass, inertia tensor."""
    from scanmass.cli.mass_tables import assembly_summary_table, assembly_table
    from scanmass.mass.assembly import assemble as assemble_file
    from scanmass.outputs.atomic import write_atomic

    with user_errors():
        result = assemble_file(file, materials=materials)
        inputs = [file, *(file.parent / m.source for m in result.members)]
        if csv_out is not None:
            written = write_atomic(csv_out, result.to_csv(), inputs=inputs)
    if json_out != "-":
        console = _console()
        console.print(assembly_table(result))
        console.print(assembly_summary_table(result))
        console.print(f"[yellow]caution:[/] {escape(result.cautions)}", markup=True)
        if csv_out is not None:
            console.print(f"wrote {written}")
    _emit_json(json_out, result.to_json(), inputs)


@app.command()
def balance(
    source: Annotated[Path, typer.Argument(help="Result JSON from 'scanmass measure --json', or an image to measure.")],
    *,
    material: MaterialOpt = None,
    thickness: ThicknessOpt = None,
    thickness_tol: ThicknessTolOpt = DEFAULTS.thickness_u_mm,
    rpm: Annotated[float | None, typer.Option("--rpm", help="Maximum service speed, rev/min.")] = None,
    grade: Annotated[
        float | None, typer.Option("--grade", help="ISO 21940-11 balance quality grade G, mm/s (e.g. 6.3).")
    ] = None,
    bore: Annotated[
        int | None,
        typer.Option("--bore", help="Label of the hole the part spins about (default: the hole nearest the centroid)."),
    ] = None,
    part: Annotated[
        int | None, typer.Option("--part", help="Part label (needed when the result has several parts).")
    ] = None,
    radius: Annotated[
        float | None,
        typer.Option("--radius", help="Correction radius from the axis, mm (default: midway between bore and rim)."),
    ] = None,
    drill: Annotated[
        float | None, typer.Option("--drill", help="Drill diameter for a blind-hole correction, mm.")
    ] = None,
    drill_step: Annotated[
        float | None, typer.Option("--drill-step", help="Round the through-hole diameter to this step, mm.")
    ] = None,
    json_out: JsonOutOpt = None,
    dpi: DpiOpt = None,
    materials: MaterialsFileOpt = None,
) -> None:
    """Static unbalance of a plate spinning about a bore, against an ISO 21940-11 grade."""
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
            thickness_u_mm=thickness_tol,
            hole=bore,
            rpm=rpm,
            grade=grade,
            correction_radius_mm=radius,
            drill_diameter_mm=drill,
            drill_step_mm=drill_step,
            materials=materials,
        )
    if json_out != "-":
        console = _console()
        console.print(balance_table(result))
        console.print(f"[bold]{escape(result.verdict)}[/]", markup=True)
        for note in result.notes:
            console.print(f"note: {escape(note)}")
        console.print(f"[yellow]caution:[/] {escape(result.cautions)}", markup=True)
    _emit_json(json_out, result.to_json(), [source])


# -- outline export and HTML report ------------------------------------------------------
@app.command("export")
def export_outlines(
    result: Annotated[Path, typer.Argument(help="Result JSON from 'scanmass measure --json'.")],
    *,
    dxf: Annotated[
        Path | None, typer.Option("--dxf", help="Write the outlines as DXF in mm (layers OUTLINE, HOLES, REFERENCE).")
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
) -> None:
    """Write the measured outlines of RESULT as DXF and/or SVG, for CAD and cutting."""
    from scanmass.outputs.export import export_dxf, export_svg

    if dxf is None and svg is None:
        fail("nothing to write; give --dxf OUT.dxf and/or --svg OUT.svg")
    console = _console()
    with user_errors():
        if dxf is not None:
            s = export_dxf(
                result, dxf, fit_tolerance_mm=fit_tolerance, round_tolerance_mm=round_tolerance, parts=part or None
            )
            console.print(
                f"wrote {s.path}: {s.parts} part(s), {s.vertices_in} -> {s.vertices_out} vertices "
                f"({s.arcs} arcs), {s.circles} hole(s) as circles"
            )
        if svg is not None:
            s = export_svg(result, svg, parts=part or None)
            console.print(f"wrote {s.path}: {s.parts} part(s), {s.vertices_out} vertices")


@app.command()
def report(
    results: Annotated[
        list[Path], typer.Argument(help="Result JSON files from 'scanmass measure --json', or one batch output folder.")
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
) -> None:
    """Write one self-contained HTML report of the RESULTS (prints on A4).

    Given a batch's output folder instead, write its summary page: counts, failures, a
    sortable table of all parts and plots.
    """
    from scanmass.outputs.report import write_report

    if html is None:
        fail("give the report file to write with --html OUT.html")
    if len(results) == 1 and results[0].is_dir():
        from scanmass.batch.export import summary_rows
        from scanmass.outputs.report import write_summary

        with user_errors():
            rows, failures = summary_rows(results[0])
            written = write_summary(
                rows,
                failures,
                html,
                title=title if title != "scanmass measurement report" else "scanmass batch summary",
            )
        _console().print(f"wrote {written}")
        return
    if overlay and len(overlay) > len(results):
        fail(
            f"{len(overlay)} overlays for {len(results)} result(s); give at most one --overlay per result, in the same order"
        )
    with user_errors():
        written = write_report(results, html, overlays=dict(enumerate(overlay or [])), title=title)
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
    format: Annotated[
        str,
        typer.Option(
            "--format",
            help="csv: one row per part (the columns of parts.csv); jsonl: one JSON object per file with its status and full result.",
        ),
    ] = "csv",
    out: Annotated[str, typer.Option("--out", help="File to write; '-' for standard output.")] = "-",
) -> None:
    """Export a batch's results again from its database."""
    from scanmass.batch.export import export_batch, iter_export

    with user_errors():
        if out == "-":
            for piece in iter_export(out_dir, format=cast(ExportFormat, format)):
                sys.stdout.write(piece)
            return
        written = export_batch(out_dir, format=cast(ExportFormat, format), out=out)
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
            "--out", help="Lens profile JSON to write (default: calibration/lens-WxH.json, or ./ outside a checkout)."
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
