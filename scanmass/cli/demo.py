"""The demo scenario and ``scanmass demo``.

Invented scenario: *Wrenfield Cycle Restorations*, a two-person workshop rebuilding a
1950s delivery tricycle, holds several flat parts with no drawings: a rear-carrier
bracket, a mudguard stay clip, a cork hub gasket and a dynamo fan plate. Their
sample scans are rendered by :func:`make_samples` (``samples/make_samples.py`` calls it)
from the exact outlines below, so the demo can show the true values beside the measured
ones. All numbers here are invented for the demo.

The demo's settings (``demo.toml``: how each sample is measured; the carrier assembly)
ship with the package in ``scanmass/cli/data/``; :func:`make_samples` copies them beside
the images. In a checkout the demo measures ``samples/``; installed from a wheel, it
renders the same files (deterministically, a few seconds) into ``OUT/samples/`` first.
"""

from __future__ import annotations

import io
import math
import os
import tomllib
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np

from scanmass.errors import ScanmassError
from scanmass.measurement import Measurement
from scanmass.testing.scans import SynthPart, regular_polygon, render_scan, rotate, save_scan

__all__ = ["DemoSummary", "demo_scans", "demo_photos", "make_samples", "run_demo", "samples_dir", "SETTINGS_FILES"]

#: The demo's settings files, shipped in ``scanmass/cli/data/`` and copied beside the samples.
SETTINGS_FILES = ("demo.toml", "wrenfield-carrier-assembly.toml")


def _rounded_rect(x0: float, y0: float, w: float, h: float, r: float, n_arc: int = 48) -> np.ndarray:
    pts = []
    corners = [(x0 + w - r, y0 + r, -90), (x0 + w - r, y0 + h - r, 0), (x0 + r, y0 + h - r, 90), (x0 + r, y0 + r, 180)]
    for cx, cy, start in corners:
        for t in np.linspace(start, start + 90, n_arc, endpoint=False):
            pts.append((cx + r * math.cos(math.radians(t)), cy + r * math.sin(math.radians(t))))
    return np.array(pts)


def _circle(cx: float, cy: float, r: float, n: int = 720) -> np.ndarray:
    return regular_polygon(cx, cy, r, n)


def _moved(ring: np.ndarray, dx: float, dy: float, angle_deg: float = 0.0, about=(0.0, 0.0)) -> np.ndarray:
    return rotate(ring, angle_deg, about_mm=about) + [dx, dy]


def carrier_bracket() -> tuple[np.ndarray, list[np.ndarray]]:
    """Rear-carrier bracket: an L of 70 x 45 mm with 9 mm legs and two 6.5 mm holes."""
    outer = np.array([(0, 0), (70, 0), (70, 9), (9, 9), (9, 45), (0, 45)], dtype=float)
    holes = [_circle(55.0, 4.5, 3.25), _circle(4.5, 35.0, 3.25)]
    return outer, holes


def stay_clip() -> tuple[np.ndarray, list[np.ndarray]]:
    """Mudguard stay clip: a 38 x 16 mm rounded plate with a 5.2 mm and a 4.2 mm hole."""
    outer = _rounded_rect(0, 0, 38, 16, 5)
    return outer, [_circle(7.5, 8, 2.6), _circle(29.0, 8, 2.1)]


def hub_gasket() -> tuple[np.ndarray, list[np.ndarray]]:
    """Cork hub gasket: 64 mm across, 30 mm bore, four 5 mm bolt holes on a 48 mm circle."""
    holes = [_circle(0, 0, 15.0)]
    for k in range(4):
        a = math.radians(45 + 90 * k)
        holes.append(_circle(24 * math.cos(a), 24 * math.sin(a), 2.5, 240))
    return _circle(0, 0, 32.0), holes


def fan_plate() -> tuple[np.ndarray, list[np.ndarray]]:
    """Dynamo fan plate: a 58 mm disc, 8 mm bore 0.6 mm off centre, three 9 mm windows."""
    holes = [_circle(0.6, 0.2, 4.0, 360)]
    for k in range(3):
        a = math.radians(90 + 120 * k)
        holes.append(_circle(17 * math.cos(a), 17 * math.sin(a), 4.5, 360))
    return _circle(0, 0, 29.0), holes


@dataclass
class DemoScan:
    """One sample scan: how to render it and how to measure it."""

    file: str
    dpi: float
    size_mm: tuple[float, float]
    parts: list[tuple[np.ndarray, list[np.ndarray]]]
    material: str | None = None
    thickness_mm: float | None = None
    thickness_u_mm: float = 0.0
    render: dict[str, Any] = field(default_factory=dict)


def demo_scans() -> list[DemoScan]:
    """The scenario's scans with the exact part outlines placed on the scanner glass (mm)."""
    b_out, b_holes = carrier_bracket()
    c_out, c_holes = stay_clip()
    g_out, g_holes = hub_gasket()
    f_out, f_holes = fan_plate()
    bracket = (_moved(b_out, 14, 22, 8, (35, 22)), [_moved(h, 14, 22, 8, (35, 22)) for h in b_holes])
    clip = (_moved(c_out, 96, 48, -21, (19, 8)), [_moved(h, 96, 48, -21, (19, 8)) for h in c_holes])
    gasket = (g_out + [46, 44], [h + [46, 44] for h in g_holes])
    fan = (_moved(f_out, 40, 38, 33.0), [_moved(h, 40, 38, 33.0) for h in f_holes])
    return [
        DemoScan(
            "wrenfield-carrier-bracket-and-clip.jpg",
            300.0,
            (150.0, 100.0),
            [bracket, clip],
            material="carbon-steel",
            thickness_mm=3.0,
            thickness_u_mm=0.05,
            render=dict(
                background=0.82, foreground=0.05, blur_px=0.9, noise=0.006, illumination=(0.06, -0.04), seed=11
            ),
        ),
        DemoScan(
            "wrenfield-hub-gasket.png",
            300.0,
            (92.0, 88.0),
            [gasket],
            material="cork-gasket",
            thickness_mm=2.0,
            thickness_u_mm=0.1,
            render=dict(background=0.80, foreground=0.22, blur_px=1.1, noise=0.004, seed=12),
        ),
        DemoScan(
            "wrenfield-fan-plate.jpg",
            400.0,
            (80.0, 76.0),
            [fan],
            material="aluminium-5083",
            thickness_mm=2.0,
            thickness_u_mm=0.03,
            render=dict(background=0.03, foreground=0.62, blur_px=1.0, noise=0.005, seed=13),
        ),
    ]


def chainstay_gusset() -> tuple[np.ndarray, list[np.ndarray]]:
    """Chainstay gusset plate: a 92 x 64 mm triangle with cut corners, three 6.5 mm holes and a 14 mm window."""
    outer = np.array([(0, 0), (86, 0), (92, 6), (8, 64), (0, 60)], dtype=float)
    holes = [
        _circle(10.0, 8.0, 3.25, 360),
        _circle(76.0, 8.0, 3.25, 360),
        _circle(10.0, 50.0, 3.25, 360),
        _circle(30.0, 22.0, 7.0, 360),
    ]
    return outer, holes


@dataclass
class DemoPhoto:
    """One sample phone photo of a part on the printed A4 marker mat."""

    file: str
    parts: list[tuple[np.ndarray, list[np.ndarray]]]
    camera: dict[str, Any]
    print_scale: tuple[float, float]
    printed_x_mm: float
    printed_y_mm: float
    material: str | None = None
    thickness_mm: float | None = None
    thickness_u_mm: float = 0.0
    render: dict[str, Any] = field(default_factory=dict)


def demo_photos() -> list[DemoPhoto]:
    """The scenario's phone photo: the gusset on an A4 mat whose printer stretched x by 0.4 % and shrank y by 0.3 %."""
    g_out, g_holes = chainstay_gusset()
    about = (46.0, 32.0)
    gusset = (_moved(g_out, 58.0, 112.0, 24.0, about), [_moved(h, 58.0, 112.0, 24.0, about) for h in g_holes])
    return [
        DemoPhoto(
            "wrenfield-chainstay-gusset-on-mat.jpg",
            [gusset],
            camera=dict(
                target_mm=(108.0, 150.0),
                distance_mm=400.0,
                tilt_deg=18.0,
                tilt_dir_deg=-35.0,
                roll_deg=84.0,
                f_px=1700.0,
                size_px=(2000, 1500),
            ),
            print_scale=(1.004, 0.997),
            printed_x_mm=100.4,
            printed_y_mm=99.7,
            material="carbon-steel",
            thickness_mm=2.5,
            thickness_u_mm=0.05,
            render=dict(blur_px=1.1, noise=0.006, light=(0.15, -0.1), seed=14),
        ),
    ]


def samples_dir() -> Path | None:
    """The repository's samples/ folder when scanmass runs from a checkout, else None."""
    candidate = Path(__file__).resolve().parents[2] / "samples"
    return candidate if (candidate / "demo.toml").is_file() else None


def settings_text(name: str) -> str:
    """The text of one of :data:`SETTINGS_FILES`, as shipped with the package."""
    return resources.files("scanmass.cli").joinpath("data", name).read_text(encoding="utf-8")


def make_samples(folder: str | os.PathLike) -> list[Path]:
    """Render the scenario's sample scans into ``folder`` (deterministic), with the demo's settings files."""
    from scanmass.outputs.atomic import write_atomic

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    written = [Path(write_atomic(folder / name, settings_text(name))) for name in SETTINGS_FILES]
    for scan in demo_scans():
        parts = [SynthPart(outer, holes) for outer, holes in scan.parts]
        synth = render_scan(parts, dpi=scan.dpi, size_mm=scan.size_mm, **scan.render)
        written.append(save_scan(synth, folder / scan.file, quality=90))
    from PIL import Image

    from scanmass.scale.mat import make_mat
    from scanmass.testing.photos import look_at, render_mat_photo

    for photo in demo_photos():
        img = render_mat_photo(
            make_mat("a4-portrait"),
            photo.parts,
            look_at(**photo.camera),
            height_mm=photo.thickness_mm or 0.0,
            print_scale=photo.print_scale,
            **photo.render,
        )
        bio = io.BytesIO()
        Image.fromarray(img).save(bio, format="JPEG", quality=90)  # a phone's JPEG: no DPI, no EXIF
        written.append(Path(write_atomic(folder / photo.file, bio.getvalue())))
    return written


@dataclass
class DemoSummary:
    """What the demo measured and wrote."""

    out_dir: Path
    measurements: list[Measurement]
    lines: list[str]
    written: list[Path]


def _settings(folder: Path) -> dict[str, Any]:
    with open(folder / "demo.toml", "rb") as fh:
        return tomllib.load(fh)


def run_demo(out: str | os.PathLike, *, units: str = "mm") -> DemoSummary:
    """Measure the sample scans end to end, writing JSON, CSV and overlays into ``out``.

    ``units`` (mm or in) applies to the CSV files, overlays and the report; the JSON is in mm.
    The report includes the balance verdicts and the assembly.
    """
    from scanmass.outputs.atomic import write_atomic
    from scanmass.outputs.writers import measure_to_outputs

    out_dir = Path(out)
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ScanmassError(
            f"cannot create the demo folder ({exc.strerror}); pass --out to a writable folder", path=str(out_dir)
        ) from None
    folder = samples_dir()
    if folder is None:  # installed without the repository: render the samples afresh
        folder = out_dir / "samples"
        make_samples(folder)
    settings = _settings(folder)
    scenario: list[DemoScan | DemoPhoto] = [*demo_scans(), *demo_photos()]
    truth = {s.file: s for s in scenario}
    measurements: list[Measurement] = []
    lines: list[str] = []
    written: list[Path] = []
    overlays: dict[int, Path] = {}
    balances: list[Any] = []
    assemblies: list[Any] = []
    for entry in settings["scan"]:
        src = folder / entry["file"]
        stem = Path(entry["file"]).stem
        result = measure_to_outputs(
            src,
            json_out=out_dir / f"{stem}.json",
            csv_out=out_dir / f"{stem}.csv",
            overlay_out=out_dir / f"{stem}-overlay.png",
            material=entry.get("material"),
            thickness_mm=entry.get("thickness_mm"),
            thickness_u_mm=entry.get("thickness_u_mm", 0.0),
            printed_x_mm=entry.get("printed_x_mm"),
            printed_y_mm=entry.get("printed_y_mm"),
            units=units,
        )
        measurements.append(result.measurement)
        written += [Path(p) for p in result.written]
        lines += _truth_lines(result.measurement, truth.get(entry["file"]))
        overlays[len(measurements) - 1] = out_dir / f"{stem}-overlay.png"
        if entry.get("export_dxf"):
            from scanmass.outputs.export import export_dxf, export_svg

            export_dxf(result.measurement, out_dir / f"{stem}.dxf", fit_tolerance_mm="auto")
            export_svg(result.measurement, out_dir / f"{stem}.svg")
            written += [out_dir / f"{stem}.dxf", out_dir / f"{stem}.svg"]
            lines.append(f"outlines of {entry['file']} for CAD: {stem}.dxf, {stem}.svg")
        spin = entry.get("balance")
        if spin:
            from scanmass.mass.balance import balance_measurement

            balance = balance_measurement(
                result.measurement,
                entry["material"],
                entry["thickness_mm"],
                thickness_u_mm=entry.get("thickness_u_mm", 0.0),
                rpm=spin["rpm"],
                grade=spin["grade"],
            )
            balance.source = entry["file"]
            balances.append(balance)
            path = write_atomic(out_dir / f"{stem}-balance.json", balance.to_json() + "\n")
            written.append(Path(path))
            lines.append(f"{entry['file']} spinning at {spin['rpm']:g} rpm: {balance.verdict}")
    assembly_file = folder / "wrenfield-carrier-assembly.toml"
    if assembly_file.is_file():
        from scanmass.mass.assembly import assemble

        assembly = assemble(assembly_file)
        assemblies.append(assembly)
        written.append(Path(write_atomic(out_dir / "wrenfield-carrier-assembly.json", assembly.to_json() + "\n")))
        written.append(Path(write_atomic(out_dir / "wrenfield-carrier-assembly.csv", assembly.to_csv())))
        com = ", ".join(f"{v:.2f}" for v in assembly.centre_of_mass_mm)
        lines.append(
            f"assembly '{assembly.name}': {assembly.mass_g:.2f} ± {assembly.mass_u_g:.2f} g, centre of mass ({com}) mm"
        )
    from scanmass.outputs.report import write_report

    report = write_report(
        measurements,
        out_dir / "report.html",
        overlays=overlays,
        title="Wrenfield Cycle Restorations: legacy parts measured by scanmass",
        balances=balances,
        assemblies=assemblies,
        units=units,
    )
    written.append(Path(report))
    lines.append(f"report: {report}")
    return DemoSummary(out_dir=out_dir, measurements=measurements, lines=lines, written=written)


def _truth_lines(m: Measurement, scan: DemoScan | DemoPhoto | None) -> list[str]:
    """Compare measured areas and centroids with the exact outlines the scan was rendered from."""
    if scan is None:
        return []
    from scanmass.section import section_properties

    lines = []
    truths = [section_properties(o, h) for o, h in scan.parts]
    for part in m.parts:
        best = min(truths, key=lambda t: math.dist(t.centroid_mm, part.centroid_mm))
        err_a = part.area_mm2 - best.area_mm2
        err_c = math.dist(part.centroid_mm, best.centroid_mm)
        lines.append(
            f"{Path(m.source.path or '').name} part {part.label}: area {part.area_mm2:.3f} mm² (true {best.area_mm2:.3f}, "
            f"error {err_a:+.3f}, stated u {part.area_u_mm2:.3f}); centroid off by {err_c * 1000:.1f} µm"
        )
    return lines
