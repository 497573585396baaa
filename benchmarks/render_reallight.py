"""Render the real-light test set with Blender's Cycles path tracer (run by hand).

Thick parts of metal, plastic and nylon with known outlines lie on the printed A4 marker
mat (its PNG as a matte paper texture at true printed size) and are photographed by a
phone-like camera (26 mm equivalent, 30-45 cm above the mat, 0-30 degrees of tilt) under
soft overhead light, a hard spotlight from about 40 degrees or window light from one
side. A scanner group (``--scanner``) images parts 3-8 mm thick as a flatbed does:
orthographically at 300 dpi from below the glass, the white lid resting on the thickest
part, one lamp (parallel light, as a lamp travelling with the carriage gives) at 35-45
degrees along the carriage axis. Each image gets a truth JSON (outlines in mat mm for a
photo, in the scan frame for a scan; thickness, material, light, camera).

Usage::

    python benchmarks/render_reallight.py --out tests/data/reallight            # every scene
    python benchmarks/render_reallight.py --out /tmp/rl --only soft-steel-t0 --samples 16
    python benchmarks/render_reallight.py --out tests/data/reallight --scanner --only scan-steel-lamp35 --samples 64

The same file runs twice: with plain Python it builds the scene specifications (it needs
scanmass for the mat and numpy for the outlines) and calls ``blender -b -P <this file>``;
inside Blender (no numpy there) it reads one specification and renders it.
"""

from __future__ import annotations

import json
import math
import os
import sys

MM = 0.001  # Blender units are metres


# ---------------------------------------------------------------------------------
# Blender side (bpy only)
# ---------------------------------------------------------------------------------


def _blender_main(spec_path: str) -> None:  # pragma: no cover - runs inside Blender
    import bpy  # type: ignore[import-not-found]
    from mathutils import Vector  # type: ignore[import-not-found]

    with open(spec_path) as fh:
        spec = json.load(fh)
    bpy.ops.wm.read_factory_settings(use_empty=True)
    scene = bpy.context.scene
    scene.render.engine = "CYCLES"
    scene.cycles.device = "CPU"
    scene.cycles.samples = int(spec["samples"])
    scene.cycles.use_denoising = False
    scene.cycles.use_adaptive_sampling = True
    scene.cycles.adaptive_threshold = 0.02
    scene.cycles.max_bounces = 6
    scene.cycles.glossy_bounces = 3
    scene.cycles.diffuse_bounces = 2
    scene.cycles.transmission_bounces = 2
    scene.cycles.caustics_reflective = False
    scene.cycles.caustics_refractive = False
    scene.cycles.seed = int(spec.get("seed", 0))
    scene.render.threads_mode = "FIXED"
    scene.render.threads = int(spec.get("threads", 1))
    scene.render.resolution_x, scene.render.resolution_y = spec["size_px"]
    scene.render.resolution_percentage = 100
    scene.render.film_transparent = False
    scene.view_settings.view_transform = spec.get("view_transform", "Standard")
    scene.view_settings.look = spec.get("look", "None")
    scene.view_settings.exposure = float(spec.get("exposure", 0.0))
    scene.render.image_settings.file_format = "JPEG"
    scene.render.image_settings.quality = int(spec.get("jpeg_quality", 90))
    scene.render.image_settings.color_mode = "RGB"

    world = bpy.data.worlds.new("world")
    scene.world = world
    world.use_nodes = True
    bg = world.node_tree.nodes["Background"]
    bg.inputs[0].default_value = (*spec["world_rgb"], 1.0)
    bg.inputs[1].default_value = float(spec["world_strength"])

    # -- paper: the mat (or a white lid) as a matte texture at its true size ------------------
    w_mm, h_mm = spec["paper_mm"]
    scanner = bool(spec.get("scanner"))
    lid_z_mm = float(spec.get("lid_z_mm", 0.0))
    bpy.ops.mesh.primitive_plane_add(size=1.0)
    paper = bpy.context.object
    paper.scale = (w_mm * MM, h_mm * MM, 1.0)
    ox_mm, oy_mm = spec.get("paper_origin_mm", (0.0, 0.0))
    paper.location = ((ox_mm + 0.5 * w_mm) * MM, (oy_mm + 0.5 * h_mm) * MM, lid_z_mm * MM)
    mat = bpy.data.materials.new("paper")
    mat.use_nodes = True
    nt = mat.node_tree
    bsdf = nt.nodes["Principled BSDF"]
    bsdf.inputs["Roughness"].default_value = 0.95
    bsdf.inputs["Specular"].default_value = 0.25
    if spec.get("paper_png"):
        tex = nt.nodes.new("ShaderNodeTexImage")
        tex.image = bpy.data.images.load(spec["paper_png"])
        tex.image.colorspace_settings.name = "sRGB"
        tex.interpolation = "Cubic"
        tint = nt.nodes.new("ShaderNodeMixRGB")
        tint.blend_type = "MULTIPLY"
        tint.inputs[0].default_value = 1.0
        tint.inputs[2].default_value = (*spec["paper_rgb"], 1.0)
        nt.links.new(tex.outputs["Color"], tint.inputs[1])
        nt.links.new(tint.outputs["Color"], bsdf.inputs["Base Color"])
    else:
        bsdf.inputs["Base Color"].default_value = (*spec["paper_rgb"], 1.0)
    # paper fibre texture: a faint noise bump
    noise = nt.nodes.new("ShaderNodeTexNoise")
    noise.inputs["Scale"].default_value = 4000.0
    bump = nt.nodes.new("ShaderNodeBump")
    bump.inputs["Strength"].default_value = 0.05
    nt.links.new(noise.outputs["Fac"], bump.inputs["Height"])
    nt.links.new(bump.outputs["Normal"], bsdf.inputs["Normal"])
    paper.data.materials.append(mat)

    # -- table under the paper (a photo; a scanner's camera looks up from below the glass) ------
    if not scanner:
        bpy.ops.mesh.primitive_plane_add(size=3.0, location=(0.1, 0.15, -0.0002))
        table = bpy.context.object
        tmat = bpy.data.materials.new("table")
        tmat.use_nodes = True
        tb = tmat.node_tree.nodes["Principled BSDF"]
        tb.inputs["Base Color"].default_value = (*spec["table_rgb"], 1.0)
        tb.inputs["Roughness"].default_value = 0.6
        table.data.materials.append(tmat)

    # -- parts: 2D curves with holes, extruded to their thickness --------------------------------
    for k, part in enumerate(spec["parts"]):
        cu = bpy.data.curves.new(f"part{k}", "CURVE")
        cu.dimensions = "2D"
        cu.fill_mode = "BOTH"
        half = 0.5 * part["thickness_mm"] * MM
        cu.extrude = half
        for ring in [part["outer_mm"], *part["holes_mm"]]:
            sp = cu.splines.new("POLY")
            sp.points.add(len(ring) - 1)
            for p, (x, y) in zip(sp.points, ring):
                p.co = (x * MM, y * MM, 0.0, 1.0)
            sp.use_cyclic_u = True
        ob = bpy.data.objects.new(f"part{k}", cu)
        ob.location = (0.0, 0.0, half + 0.00001)
        scene.collection.objects.link(ob)
        pm = bpy.data.materials.new(f"m{k}")
        pm.use_nodes = True
        pb = pm.node_tree.nodes["Principled BSDF"]
        m = part["shader"]
        pb.inputs["Base Color"].default_value = (*m["rgb"], 1.0)
        pb.inputs["Metallic"].default_value = m["metallic"]
        pb.inputs["Roughness"].default_value = m["roughness"]
        pb.inputs["Specular"].default_value = m.get("specular", 0.5)
        pb.inputs["Anisotropic"].default_value = m.get("anisotropic", 0.0)
        cu.materials.append(pm)

    # -- lights ----------------------------------------------------------------------------------
    for li in spec["lights"]:
        data = bpy.data.lights.new(li["name"], li["type"])
        data.energy = li["power_w"]
        data.color = li.get("rgb", (1.0, 1.0, 1.0))
        if li["type"] == "AREA":
            data.shape = "RECTANGLE"
            data.size, data.size_y = li["size_m"]
        elif li["type"] == "SPOT":
            data.shadow_soft_size = li.get("radius_m", 0.003)
            data.spot_size = math.radians(li.get("cone_deg", 60.0))
            data.spot_blend = 0.4
        elif li["type"] == "SUN":
            data.angle = math.radians(li.get("angle_deg", 5.0))
        else:
            data.shadow_soft_size = li.get("radius_m", 0.003)
        ob = bpy.data.objects.new(li["name"], data)
        ob.location = li["location_m"]
        scene.collection.objects.link(ob)
        direction = Vector(li["target_m"]) - Vector(li["location_m"])
        ob.rotation_euler = direction.to_track_quat("-Z", "Y").to_euler()

    # -- camera ----------------------------------------------------------------------------------
    cam = spec["camera"]
    cdata = bpy.data.cameras.new("camera")
    if cam["type"] == "ortho":
        cdata.type = "ORTHO"
        cdata.ortho_scale = cam["ortho_scale_m"]
    else:
        cdata.lens = cam["focal_mm"]
        cdata.sensor_fit = "HORIZONTAL"
        cdata.sensor_width = cam["sensor_width_mm"]
    cdata.clip_start, cdata.clip_end = 0.01, 10.0
    cob = bpy.data.objects.new("camera", cdata)
    cob.location = cam["location_m"]
    direction = Vector(cam["target_m"]) - Vector(cam["location_m"])
    cob.rotation_euler = direction.to_track_quat("-Z", "Y").to_euler()
    scene.collection.objects.link(cob)
    scene.camera = cob

    scene.render.filepath = spec["out_path"]
    bpy.ops.render.render(write_still=True)


# ---------------------------------------------------------------------------------
# Python side: scenes and truth
# ---------------------------------------------------------------------------------

SHADERS = {
    "brushed-steel": {"rgb": [0.62, 0.62, 0.64], "metallic": 1.0, "roughness": 0.28, "anisotropic": 0.6},
    "black-plastic": {"rgb": [0.025, 0.025, 0.028], "metallic": 0.0, "roughness": 0.35, "specular": 0.5},
    "brass": {"rgb": [0.78, 0.56, 0.22], "metallic": 1.0, "roughness": 0.22},
    "white-nylon": {"rgb": [0.80, 0.79, 0.76], "metallic": 0.0, "roughness": 0.55, "specular": 0.4},
}


def _shapes():
    """Known outlines (mm, about their own origin): (outer, holes) per shape name."""
    import numpy as np

    def circle(cx, cy, r, n=180, cw=False):
        t = np.linspace(0, 2 * np.pi, n, endpoint=False)
        ring = np.c_[cx + r * np.cos(t), cy + r * np.sin(t)]
        return ring[::-1] if cw else ring

    def rounded_rect(w, h, r, n=12):
        pts = []
        for cx, cy, a0 in [
            (w / 2 - r, h / 2 - r, 0),
            (-w / 2 + r, h / 2 - r, 90),
            (-w / 2 + r, -h / 2 + r, 180),
            (w / 2 - r, -h / 2 + r, 270),
        ]:
            for t in np.radians(np.linspace(a0, a0 + 90, n)):
                pts.append((cx + r * np.cos(t), cy + r * np.sin(t)))
        return np.array(pts)

    plate = (rounded_rect(62.0, 40.0, 4.0), [circle(-20, 0, 3.25, 96), circle(20, 0, 3.25, 96), circle(0, 6, 5.0, 120)])
    lb = np.array([[-22, -18], [24, -18], [24, -6], [-10, -6], [-10, 22], [-22, 22]], float)
    bracket = (lb, [circle(12, -12, 2.75, 96), circle(-16, 12, 2.75, 96)])
    disc = (circle(0, 0, 21.0, 360), [circle(5.0, 2.0, 4.0, 120)])
    ring = (circle(0, 0, 22.0, 360), [circle(0, 0, 15.0, 300)])
    t = np.linspace(0, 2 * np.pi, 360, endpoint=False)
    r = 16.0 + 5.0 * (1 - np.cos(t)) ** 1.5 / 2.8284
    cam = (np.c_[r * np.cos(t), r * np.sin(t)], [circle(0, 0, 4.0, 120)])
    return {"plate": plate, "l-bracket": bracket, "disc": disc, "gasket": ring, "cam": cam}


def _place(shape, x, y, angle_deg):
    import numpy as np

    c, s = math.cos(math.radians(angle_deg)), math.sin(math.radians(angle_deg))
    rot = np.array([[c, -s], [s, c]])
    outer, holes = shape
    return (outer @ rot.T + [x, y], [h @ rot.T + [x, y] for h in holes])


def _scene_parts(parts: list, shapes: dict, *, photo: bool) -> tuple[list[dict], list[dict]]:
    """The renderer's part specs and their truth records; a photo's truth also says where the top face lies."""
    import numpy as np

    spec_parts, truth_parts = [], []
    for shape, material, thick, x, y, ang in parts:
        outer, holes = _place(shapes[shape], x, y, ang)
        spec_parts.append(
            {
                "outer_mm": outer.tolist(),
                "holes_mm": [h.tolist() for h in holes],
                "thickness_mm": thick,
                "shader": SHADERS[material],
            }
        )
        truth = {
            "shape": shape,
            "material": material,
            "thickness_mm": thick,
            "outline_mm": np.round(outer, 5).tolist(),
            "holes_mm": [np.round(h, 5).tolist() for h in holes],
        }
        if photo:
            truth["top_face"] = (
                "the top face has the same outline (a straight extrusion); it lies thickness_mm above the mat"
            )
            truth["placement"] = {"x_mm": x, "y_mm": y, "angle_deg": ang}
        truth_parts.append(truth)
    return spec_parts, truth_parts


def _lights(style: str, centre_m):
    cx, cy = centre_m
    if style == "soft":  # overhead softbox plus room light
        return (
            [
                {
                    "name": "soft",
                    "type": "AREA",
                    "power_w": 60.0,
                    "size_m": [0.9, 0.9],
                    "location_m": [cx, cy, 0.9],
                    "target_m": [cx, cy, 0.0],
                }
            ],
            0.25,
            -2.5,
        )
    if style == "spot":  # a hard spot from 40 degrees elevation
        el, az = math.radians(40), math.radians(30)
        d = 0.7
        loc = [cx + d * math.cos(el) * math.cos(az), cy + d * math.cos(el) * math.sin(az), d * math.sin(el)]
        return (
            [
                {
                    "name": "spot",
                    "type": "SPOT",
                    "power_w": 160.0,
                    "radius_m": 0.002,
                    "cone_deg": 70.0,
                    "location_m": loc,
                    "target_m": [cx, cy, 0.0],
                }
            ],
            0.12,
            -2.8,
        )
    if style == "window":  # a large window from the left, low
        el = math.radians(25)
        d = 0.9
        loc = [cx - d * math.cos(el), cy + 0.1, d * math.sin(el)]
        return (
            [
                {
                    "name": "window",
                    "type": "AREA",
                    "power_w": 220.0,
                    "size_m": [0.5, 0.8],
                    "location_m": loc,
                    "target_m": [cx, cy, 0.0],
                    "rgb": [0.92, 0.96, 1.0],
                },
            ],
            0.2,
            -3.5,
        )
    if style == "mixed":  # warm lamp from one side, cool window from the other
        el = math.radians(45)
        return (
            [
                {
                    "name": "warm",
                    "type": "POINT",
                    "power_w": 40.0,
                    "radius_m": 0.05,
                    "location_m": [cx + 0.35, cy - 0.2, 0.5],
                    "target_m": [cx, cy, 0.0],
                    "rgb": [1.0, 0.8, 0.6],
                },
                {
                    "name": "cool",
                    "type": "AREA",
                    "power_w": 120.0,
                    "size_m": [0.5, 0.8],
                    "location_m": [cx - 0.7 * math.cos(el), cy, 0.7 * math.sin(el)],
                    "target_m": [cx, cy, 0.0],
                    "rgb": [0.85, 0.92, 1.0],
                },
            ],
            0.15,
            -3.4,
        )
    raise ValueError(style)


def scenes():
    """The scene list: name, parts (shape, material, thickness, placement), light, camera."""
    photo = [
        # name, light, [(shape, material, thickness, x, y, angle)], height_mm, tilt_deg, tilt_dir_deg, view
        (
            "soft-steel-t0",
            "soft",
            [("plate", "brushed-steel", 3.0, 80, 200, 10), ("disc", "brushed-steel", 5.0, 135, 90, 0)],
            310,
            0,
            0,
            "Standard",
        ),
        (
            "soft-black-t15",
            "soft",
            [("l-bracket", "black-plastic", 4.0, 80, 90, -15), ("gasket", "black-plastic", 2.0, 135, 195, 0)],
            320,
            15,
            40,
            "Filmic",
        ),
        (
            "spot-steel-t0",
            "spot",
            [("plate", "brushed-steel", 3.0, 95, 200, -8), ("cam", "brushed-steel", 6.0, 110, 90, 20)],
            310,
            0,
            0,
            "Standard",
        ),
        (
            "spot-black-t20",
            "spot",
            [("disc", "black-plastic", 8.0, 80, 95, 0), ("l-bracket", "black-plastic", 3.0, 130, 195, 30)],
            330,
            20,
            -60,
            "Standard",
        ),
        (
            "spot-brass-t10",
            "spot",
            [("gasket", "brass", 1.5, 75, 185, 0), ("plate", "brass", 4.0, 120, 90, 80)],
            330,
            10,
            120,
            "Filmic",
        ),
        (
            "window-nylon-t0",
            "window",
            [("cam", "white-nylon", 5.0, 80, 100, -30), ("disc", "white-nylon", 3.0, 135, 200, 0)],
            310,
            0,
            0,
            "Standard",
        ),
        (
            "window-mixed-t0",
            "window",
            [("disc", "white-nylon", 3.0, 135, 200, 0), ("l-bracket", "black-plastic", 4.0, 85, 95, -10)],
            310,
            0,
            0,
            "Standard",
        ),
        (
            "window-steel-t25",
            "window",
            [("l-bracket", "brushed-steel", 5.0, 80, 200, 5), ("gasket", "brushed-steel", 2.5, 130, 95, 0)],
            340,
            25,
            200,
            "Standard",
        ),
        (
            "mixed-brass-t30",
            "mixed",
            [("cam", "brass", 3.0, 85, 195, 60), ("disc", "brass", 6.0, 130, 100, 0)],
            360,
            30,
            90,
            "Filmic",
        ),
    ]
    return photo


RENDER_ORDER = [
    "spot-steel-t0",
    "soft-black-t15",
    "window-nylon-t0",
    "spot-black-t20",
    "mixed-brass-t30",
    "scan-steel-lamp35",
    "soft-steel-t0",
    "window-steel-t25",
    "spot-brass-t10",
    "scan-black-lamp40",
]


def scanner_scenes():
    """The scanner group: parts lying on the glass, the lid resting on the thickest one.

    name, lamp elevation (degrees above the glass), [(shape, material, thickness, x, y, angle)]
    """
    return [
        (
            "scan-steel-lamp35",
            35.0,
            [("plate", "brushed-steel", 4.0, 45, 36, 0), ("disc", "brushed-steel", 6.0, 45, 96, 0)],
        ),
        (
            "scan-black-lamp40",
            40.0,
            [("l-bracket", "black-plastic", 3.0, 42, 36, 10), ("cam", "black-plastic", 8.0, 45, 96, 0)],
        ),
    ]


def _photo_spec(entry, mat_png, out_dir, samples, size_px):
    import numpy as np

    from scanmass.scale.mat import make_mat

    name, light, parts, height_mm, tilt_deg, tilt_dir_deg, view = entry
    layout = make_mat("a4-portrait")
    shapes = _shapes()
    x0, y0, x1, y1 = layout.clear_area_mm
    target = np.array([0.5 * (x0 + x1), 0.5 * (y0 + y1), 0.0])
    t, d = math.radians(tilt_deg), math.radians(tilt_dir_deg)
    offset = height_mm * np.array([math.sin(t) * math.cos(d), math.sin(t) * math.sin(d), math.cos(t)])
    loc = target + offset
    lights, world, exposure = _lights(light, (target[0] * MM, target[1] * MM))
    spec_parts, truth_parts = _scene_parts(parts, shapes, photo=True)
    spec = {
        "samples": samples,
        "size_px": list(size_px),
        "view_transform": view,
        "world_rgb": [0.9, 0.92, 0.95],
        "world_strength": world,
        "exposure": exposure,
        "paper_mm": list(layout.page_mm),
        "paper_png": mat_png,
        "paper_rgb": [0.93, 0.92, 0.89],
        "table_rgb": [0.25, 0.18, 0.12],
        "parts": spec_parts,
        "lights": lights,
        "camera": {
            "type": "persp",
            "focal_mm": 26.0 * 36.0 / 43.27 * (36.0 / 36.0),
            "sensor_width_mm": 36.0 * size_px[0] / math.hypot(*size_px) * 43.27 / 36.0,
            "location_m": (loc * MM).tolist(),
            "target_m": (target * MM).tolist(),
        },
        "out_path": os.path.join(out_dir, name + ".jpg"),
    }
    # 26 mm equivalent: the diagonal field of view of a 26 mm lens on 36 x 24 mm (43.27 mm diagonal)
    spec["camera"]["focal_mm"] = 26.0
    spec["camera"]["sensor_width_mm"] = 43.27 * size_px[0] / math.hypot(*size_px)
    truth = {
        "schema": "scanmass.reallight-truth/1",
        "kind": "photo",
        "image": name + ".jpg",
        "frame": "mat mm: origin at the A4 mat page's lower-left corner, x right, y up",
        "mat": "a4-portrait",
        "parts": truth_parts,
        "light": {"style": light, "lights": lights, "world_strength": world, "exposure_stops": exposure},
        "camera": {
            "equivalent_focal_mm": 26.0,
            "height_mm": height_mm,
            "tilt_deg": tilt_deg,
            "tilt_dir_deg": tilt_dir_deg,
            "target_mm": target.tolist(),
            "size_px": list(size_px),
            "lens_distortion": "none (pinhole)",
        },
        "view_transform": view,
        "samples": samples,
        "renderer": "Blender Cycles (CPU)",
    }
    return spec, truth


def _scan_spec(entry, out_dir, samples, dpi):
    """A flatbed scan: the camera looks up through the glass (z = 0) at the parts' lower faces.

    The scanner's lamp travels with the carriage, so every scan line sees it at the same
    angle: a sun lamp (parallel light, 5 degrees across) from below the glass, elevation
    ``lamp_deg`` above it, shining along +y. The white lid rests on the thickest part; the
    far (+y) side of each part throws a shadow on the lid, t / tan(elevation) long, with a
    soft outer end. Seen from below the image is mirrored in x: the truth outlines are
    stored in the scan frame (mm, origin at the image's lower-left corner).
    """
    import numpy as np

    name, lamp_deg, parts = entry
    shapes = _shapes()
    size_px = (1063, 1535)  # 90 x 130 mm at 300 dpi
    s_mm = 25.4 / dpi
    w_mm, h_mm = size_px[0] * s_mm, size_px[1] * s_mm
    cx, cy = 0.5 * w_mm, 0.5 * h_mm
    el = math.radians(lamp_deg)
    ambient = 0.25  # the scanner's housing and the lid's own scattered light, as a dim white world
    strength = 0.62 * math.pi / (0.9 * math.sin(el))  # lit lid about 0.56 + 0.22 linear
    lamp = {
        "name": "lamp",
        "type": "SUN",
        "power_w": strength,
        "angle_deg": 5.0,
        "location_m": [cx * MM, (cy - 100 * math.cos(el)) * MM, -100 * math.sin(el) * MM],
        "target_m": [cx * MM, cy * MM, 0.0],
    }
    spec_parts, truth_parts = _scene_parts(parts, shapes, photo=False)
    lid_z = max(p[2] for p in parts) + 0.02

    def to_scan(ring):  # world mm -> scan frame mm (camera below the glass: x mirrored)
        pts = np.asarray(ring, dtype=float)
        return np.round(np.c_[cx + 0.5 * w_mm - pts[:, 0], pts[:, 1] - cy + 0.5 * h_mm], 5).tolist()

    for tp in truth_parts:
        tp["outline_mm"] = to_scan(tp["outline_mm"])
        tp["holes_mm"] = [to_scan(h) for h in tp["holes_mm"]]
        tp["measured_face"] = "the lower face, on the glass (z = 0)"
    spec = {
        "samples": samples,
        "size_px": list(size_px),
        "view_transform": "Standard",
        "world_rgb": [1.0, 1.0, 1.0],
        "world_strength": ambient,
        "scanner": True,
        "lid_z_mm": lid_z,
        "paper_mm": [w_mm + 60.0, h_mm + 60.0],
        "paper_png": None,
        "paper_rgb": [0.9, 0.9, 0.9],
        "table_rgb": [0.9, 0.9, 0.9],
        "parts": spec_parts,
        "lights": [lamp],
        "camera": {
            "type": "ortho",
            "ortho_scale_m": max(w_mm, h_mm) * MM,
            "location_m": [cx * MM, cy * MM, -0.2],
            "target_m": [cx * MM, cy * MM, 0.0],
        },
        "out_path": os.path.join(out_dir, name + ".jpg"),
    }
    spec["paper_origin_mm"] = [-30.0, -30.0]
    truth = {
        "schema": "scanmass.reallight-truth/1",
        "kind": "scan",
        "image": name + ".jpg",
        "frame": "scan frame mm: origin at the image's lower-left corner, x right, y up (seen from below the glass)",
        "dpi": dpi,
        "parts": truth_parts,
        "light": {
            "style": "scanner lamp",
            "elevation_deg": lamp_deg,
            "from": "below the glass, shining along +y (image up); parallel light 5 degrees across",
            "ambient_world_strength": ambient,
        },
        "lid": f"white, resting on the thickest part: {lid_z:g} mm above the glass",
        "camera": {
            "type": "orthographic, looking up through the glass at the parts' lower faces",
            "size_px": list(size_px),
            "centre_mm": [cx, cy],
            "ortho_scale_mm": max(w_mm, h_mm),
            "note": "outlines are already in the scan frame: centre_mm is the image centre in that frame",
        },
        "samples": samples,
        "renderer": "Blender Cycles (CPU)",
    }
    return spec, truth


def main(argv=None) -> int:
    import argparse
    import subprocess
    import tempfile
    import time

    import cv2

    from scanmass.scale.mat import make_mat, render_mat_png

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", required=True)
    ap.add_argument("--only", nargs="*", default=None, help="scene names")
    ap.add_argument("--samples", type=int, default=48)
    ap.add_argument("--width", type=int, default=1200)
    ap.add_argument("--height", type=int, default=1600)
    ap.add_argument("--threads", type=int, default=1)
    ap.add_argument("--exposure", type=float, default=0.0, help="stops added to every scene (tests)")
    ap.add_argument("--scanner", action="store_true", help="also the scanner group")
    args = ap.parse_args(argv)
    os.makedirs(args.out, exist_ok=True)
    work = tempfile.mkdtemp(prefix="reallight-")
    mat_png = os.path.join(work, "mat.png")
    cv2.imwrite(mat_png, render_mat_png(make_mat("a4-portrait"), dpi=600))
    photos = {e[0]: ("photo", e) for e in scenes()}
    scans = {e[0]: ("scan", e) for e in scanner_scenes()} if args.scanner else {}
    # the order in which they are rendered: a varied subset first
    order = [*RENDER_ORDER, *photos, *scans]
    todo = [{**photos, **scans}[n] for n in dict.fromkeys(order) if n in photos or n in scans]
    for kind, entry in todo:
        name = entry[0]
        if args.only and name not in args.only:
            continue
        if kind == "photo":
            spec, truth = _photo_spec(
                entry, mat_png, os.path.abspath(args.out), args.samples, (args.width, args.height)
            )
        else:
            spec, truth = _scan_spec(entry, os.path.abspath(args.out), max(8, args.samples // 2), 300)
        spec["threads"] = args.threads
        spec["exposure"] = spec.get("exposure", 0.0) + args.exposure
        spec_path = os.path.join(work, name + ".json")
        with open(spec_path, "w") as fh:
            json.dump(spec, fh)
        t0 = time.time()
        subprocess.run(
            ["blender", "-b", "-P", os.path.abspath(__file__), "--", "--spec", spec_path],
            check=True,
            capture_output=True,
        )
        truth["render_s"] = round(time.time() - t0, 1)
        with open(os.path.join(args.out, name + ".json"), "w") as fh:
            json.dump(truth, fh, indent=1)
        print(f"{name}: {truth['render_s']} s", flush=True)
    return 0


if __name__ == "__main__":
    if "--spec" in sys.argv:
        _blender_main(sys.argv[sys.argv.index("--spec") + 1])
    else:
        sys.exit(main())
