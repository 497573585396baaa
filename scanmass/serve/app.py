"""The web application of ``scanmass serve`` (Starlette): pages, the upload and job API, downloads.

:func:`create_app` builds it from a :class:`~scanmass.serve.config.ServeConfig`. Every
request passes :class:`Guard` first: loopback clients only unless ``--lan``; the
``Host`` header must name this computer's loopback when not on the network (no DNS
rebinding); with a token, every request carries it (``?token=`` once, then an HttpOnly,
SameSite=Strict cookie, or an ``Authorization: Bearer`` header), a missing one gets 401 and
a wrong one 403, with nothing else said; changes from another origin are refused. Every
response carries a Content-Security-Policy that allows this server's own scripts, styles
and images only.
"""

from __future__ import annotations

import contextlib
import hmac
import json
import math
import os
from collections.abc import AsyncIterator, Callable
from pathlib import Path
from typing import Any
from urllib.parse import parse_qs, urlsplit

from scanmass.errors import OptionError, ScanmassError
from scanmass.serve.config import ServeConfig, is_loopback
from scanmass.serve.store import LABEL_MAX, NOTE_MAX, JobRow, ServeStore, clean_text
from scanmass.serve.upload import UploadError, receive_upload, safe_name

__all__ = ["COOKIE", "CSP", "MAT_LAYOUTS", "SHEETS", "create_app"]

#: Name of the access cookie.
COOKIE = "scanmass_token"
#: The page's Content-Security-Policy: its own scripts, styles and images; no frames, no other origin.
CSP = (
    "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data: blob:; connect-src 'self'; "
    "form-action 'self'; base-uri 'none'; frame-ancestors 'none'"
)
#: Mat layouts and sheet sizes offered on the page (the library checks the names; tests keep the lists in step).
MAT_LAYOUTS = ("a4-portrait", "a4-landscape", "a3-portrait", "a3-landscape", "letter-portrait", "letter-landscape")
SHEETS = ("a4", "a3", "letter")
#: The downloads of a measured job: kind -> (file in the job folder, media type, made on demand).
DOWNLOADS = {
    "json": ("result.json", "application/json", False),
    "csv": ("parts.csv", "text/csv; charset=utf-8", False),
    "dxf": ("outline.dxf", "application/dxf", True),
    "svg": ("outline.svg", "image/svg+xml", True),
    "html": ("report.html", "text/html; charset=utf-8", True),
}
_SECURITY_HEADERS = [
    (b"content-security-policy", CSP.encode()),
    (b"x-content-type-options", b"nosniff"),
    (b"referrer-policy", b"no-referrer"),
    (b"x-frame-options", b"DENY"),
    (b"cross-origin-opener-policy", b"same-origin"),
    (b"cross-origin-resource-policy", b"same-origin"),
]


class Guard:
    """ASGI middleware: who may talk to the server, and the security headers on every answer."""

    def __init__(self, app: Any, config: ServeConfig) -> None:
        self.app = app
        self.config = config

    async def __call__(self, scope: dict, receive: Callable, send: Callable) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        headers = {k.decode("latin-1").lower(): v.decode("latin-1") for k, v in scope.get("headers", [])}
        denied = self._check(scope, headers)
        set_cookie = None
        if denied is None and self.config.token:
            query = parse_qs(scope.get("query_string", b"").decode("latin-1"))
            if query.get("token") and scope["method"] == "GET":
                set_cookie = query["token"][0]
        if denied is not None:
            await self._plain(send, *denied)
            return

        async def send_secure(message: dict) -> None:
            if message["type"] == "http.response.start":
                extra = list(_SECURITY_HEADERS)
                if set_cookie is not None:
                    cookie = f"{COOKIE}={set_cookie}; Path=/; HttpOnly; SameSite=Strict"
                    extra.append((b"set-cookie", cookie.encode("latin-1")))
                names = {k.lower() for k, _ in message.get("headers", [])}
                if b"cache-control" not in names:
                    extra.append((b"cache-control", b"no-store"))
                message = {**message, "headers": [*message.get("headers", []), *extra]}
            await send(message)

        await self.app(scope, receive, send_secure)

    def _check(self, scope: dict, headers: dict[str, str]) -> tuple[int, str] | None:
        client = scope.get("client")
        host_header = headers.get("host", "")
        hostname = urlsplit(f"//{host_header}").hostname or ""
        if not self.config.lan:
            if client is None or not is_loopback(client[0]):
                return 403, "forbidden"
            if not is_loopback(hostname):
                return 403, "forbidden"
        if self.config.token:
            given = None
            auth = headers.get("authorization", "")
            if auth.lower().startswith("bearer "):
                given = auth[7:].strip()
            if given is None:
                query = parse_qs(scope.get("query_string", b"").decode("latin-1"))
                if query.get("token"):
                    given = query["token"][0]
            if given is None:
                for part in headers.get("cookie", "").split(";"):
                    name, _, value = part.strip().partition("=")
                    if name == COOKIE:
                        given = value
            if given is None:
                return 401, "access token required"
            if not hmac.compare_digest(given.encode("utf-8", "replace"), self.config.token.encode("utf-8")):
                return 403, "forbidden"
        if scope["method"] not in ("GET", "HEAD", "OPTIONS"):
            origin = headers.get("origin")
            if origin is not None and origin != "null":
                if urlsplit(origin).netloc.lower() != host_header.lower():
                    return 403, "forbidden"
            elif origin == "null":
                return 403, "forbidden"
        return None

    async def _plain(self, send: Callable, status: int, text: str) -> None:
        body = (text + "\n").encode()
        headers = [
            (b"content-type", b"text/plain; charset=utf-8"),
            (b"content-length", str(len(body)).encode()),
            (b"cache-control", b"no-store"),
            *_SECURITY_HEADERS,
        ]
        if status == 401:
            headers.append((b"www-authenticate", b'Bearer realm="scanmass"'))
        await send({"type": "http.response.start", "status": status, "headers": headers})
        await send({"type": "http.response.body", "body": body})


def _environment():
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.PackageLoader("scanmass.serve", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
    )
    from scanmass.outputs.formatting import format_value

    def pm(value: Any, u: Any = None) -> str:
        v, uu = format_value(value, u)
        return f"{v} ± {uu}" if uu else v

    env.filters["pm"] = pm
    env.filters["num"] = lambda value: format_value(value)[0]
    return env


def _float(fields: dict[str, str], name: str, what: str) -> float | None:
    text = fields.get(name, "").strip().replace(",", ".")
    if not text:
        return None
    try:
        value = float(text)
    except ValueError:
        raise OptionError(f"{what} {text!r} is not a number, e.g. 100.0") from None
    if not math.isfinite(value):
        raise OptionError(f"{what} {text!r} is not a finite number")
    return value


def options_from_form(fields: dict[str, str], config: ServeConfig) -> dict[str, Any]:
    """The measuring options chosen on the page, checked by :class:`~scanmass.options.MeasureOptions`.

    Examples
    --------
    >>> options_from_form({"scale": "mat", "printed_x": "100.2", "printed_y": "99.9"}, ServeConfig())["printed_x_mm"]
    100.2
    """
    from scanmass.options import MeasureOptions

    scale = fields.get("scale", "auto").strip() or "auto"
    if scale not in ("auto", "mat", "sheet", "dpi"):
        raise OptionError(f"scale {scale!r} must be one of auto, mat, sheet, dpi")
    opts: dict[str, Any] = {"scale": scale, "max_pixels": config.max_pixels}
    if scale == "mat":
        layout = fields.get("mat", "").strip()
        if layout:
            if layout not in MAT_LAYOUTS:
                raise OptionError(f"mat layout {layout!r} is not known; use one of {', '.join(MAT_LAYOUTS)}")
            opts["mat"] = layout
    if scale in ("mat", "auto"):
        opts["printed_x_mm"] = _float(fields, "printed_x", "check-bar x reading")
        opts["printed_y_mm"] = _float(fields, "printed_y", "check-bar y reading")
    if scale == "sheet":
        sheet = fields.get("sheet", "a4").strip() or "a4"
        if sheet not in SHEETS:
            raise OptionError(f"sheet {sheet!r} is not known; use one of {', '.join(SHEETS)}")
        opts["sheet"] = sheet
    if scale == "dpi":
        opts["dpi"] = _float(fields, "dpi", "scan resolution")
        if opts["dpi"] is None:
            raise OptionError("a scan needs its resolution in dpi, e.g. 600")
    material = fields.get("material", "").strip() or None
    thickness = _float(fields, "thickness", "thickness")
    tol = _float(fields, "thickness_tol", "thickness uncertainty")
    if material is not None:
        from scanmass.mass.materials import load_materials

        if material not in load_materials():
            raise OptionError(f"material {material!r} is not in the material table")
        opts["material"] = material
    if thickness is not None:
        opts["thickness_mm"] = thickness
    if tol is not None:
        opts["thickness_u_mm"] = tol
    opts = {k: v for k, v in opts.items() if v is not None}
    MeasureOptions(**opts).check()
    return opts


def create_app(config: ServeConfig, *, task: Callable[..., dict[str, Any]] | None = None) -> Any:
    """The ASGI application of the bench page.

    Parameters
    ----------
    config : ServeConfig
        Where the store is, limits, workers and the access token.
    task : callable, optional
        What a worker runs for a job (default :func:`scanmass.serve.tasks.measure_task`);
        a module-level function, as it is sent to the worker processes by name.
    """
    from starlette.applications import Starlette
    from starlette.requests import Request
    from starlette.responses import FileResponse, HTMLResponse, JSONResponse, RedirectResponse, Response
    from starlette.routing import Mount, Route
    from starlette.staticfiles import StaticFiles

    from scanmass.serve.queue import JobRunner, QueueFull

    env = _environment()
    state: dict[str, Any] = {}

    def store() -> ServeStore:
        return state["store"]

    def runner() -> JobRunner:
        return state["runner"]

    @contextlib.asynccontextmanager
    async def lifespan(app: Any) -> AsyncIterator[None]:
        s = ServeStore(config.store_dir)
        r = JobRunner(config, s, **({"task": task} if task is not None else {}))
        state.update(store=s, runner=r)
        try:
            await r.start()
            yield
        finally:
            await r.stop()
            s.close()

    def page(name: str, request: Request, status: int = 200, **context: Any) -> HTMLResponse:
        from scanmass import __version__

        html = env.get_template(name).render(version=__version__, **context)
        return HTMLResponse(html, status_code=status)

    def error(request: Request, status: int, message: str, headers: dict[str, str] | None = None) -> Response:
        if _wants_json(request):
            return JSONResponse({"error": message}, status_code=status, headers=headers)
        return page("error.html.j2", request, status=status, message=message, title="Not measured")

    def job_or_404(request: Request) -> JobRow | None:
        try:
            job_id = int(request.path_params["job_id"])
        except (KeyError, ValueError):
            return None
        return store().get(job_id)

    def job_json(job: JobRow) -> dict[str, Any]:
        doc: dict[str, Any] = {
            "id": job.id,
            "status": job.status,
            "label": job.label,
            "note": job.note,
            "created": job.created,
            "finished": job.finished,
            "seconds": job.seconds,
            "error": job.error,
            "warnings": job.warnings,
            "url": f"/jobs/{job.id}",
            "image": {"sha256": job.content_sha256, "width_px": job.width_px, "height_px": job.height_px},
        }
        if job.status == "queued":
            doc["ahead"] = store().position(job.id)
        if job.status == "done":
            doc["parts"] = store().parts(job)
            doc["downloads"] = {k: f"/jobs/{job.id}/download/{k}" for k in DOWNLOADS}
        return doc

    async def index(request: Request) -> Response:
        from scanmass.mass.materials import load_materials

        materials = sorted(load_materials())
        return page(
            "index.html.j2",
            request,
            title="Measure",
            recent=store().history(limit=5),
            materials=materials,
            mat_layouts=MAT_LAYOUTS,
            sheets=SHEETS,
            max_upload_mb=config.max_upload_bytes / 1e6,
        )

    async def upload(request: Request) -> Response:
        try:
            runner().admit()
        except QueueFull as exc:
            return error(request, 429, str(exc), {"Retry-After": str(exc.retry_after_s)})
        s = store()
        headers = {k.lower(): v for k, v in request.headers.items()}
        try:
            up = await receive_upload(
                headers,
                request.stream(),
                tmp_dir=s.dir / "tmp",
                max_bytes=config.max_upload_bytes,
                max_pixels=config.max_pixels,
            )
        except UploadError as exc:
            return error(request, exc.status, exc.message)
        try:
            options = options_from_form(up.fields, config)
            runner().admit()
        except ScanmassError as exc:
            up.discard()
            return error(request, 400, str(exc))
        except QueueFull as exc:
            up.discard()
            return error(request, 429, str(exc), {"Retry-After": str(exc.retry_after_s)})
        image = f"images/{up.sha256}.{up.kind}"
        assert up.tmp_path is not None
        if (s.dir / image).exists():
            up.discard()
        else:
            os.replace(up.tmp_path, s.dir / image)
        label = up.fields.get("label", "") or up.filename
        job = s.add_job(
            image=image,
            content_sha256=up.sha256,
            size_bytes=up.size_bytes,
            width_px=up.width_px,
            height_px=up.height_px,
            client_name=up.filename,
            options=options,
            label=label,
            note=up.fields.get("note", ""),
        )
        runner().kick()
        if _wants_json(request):
            return JSONResponse(job_json(job), status_code=202, headers={"Location": f"/jobs/{job.id}"})
        return RedirectResponse(f"/jobs/{job.id}", status_code=303)

    async def job_page(request: Request) -> Response:
        job = job_or_404(request)
        if job is None:
            return error(request, 404, "no such measurement (it may have been deleted)")
        parts = store().parts(job) if job.status == "done" else []
        holes = _holes(store().result_text(job)) if job.status == "done" else []
        return page(
            "job.html.j2",
            request,
            title=job.label or f"Measurement {job.id}",
            job=job,
            parts=parts,
            holes=holes,
            ahead=store().position(job.id) if job.status == "queued" else 0,
            downloads=DOWNLOADS,
            has_mass=any(p.get("mass_g") is not None for p in parts),
        )

    async def job_api(request: Request) -> Response:
        job = job_or_404(request)
        if job is None:
            return JSONResponse({"error": "no such job"}, status_code=404)
        if request.method == "GET":
            return JSONResponse(job_json(job))
        if request.method == "DELETE":
            return await _delete(request, job)
        try:
            body = json.loads(await _small_body(request))
            if not isinstance(body, dict):
                raise ValueError
        except ValueError:
            return JSONResponse({"error": "send a JSON object with label and/or note"}, status_code=400)
        label, note = body.get("label"), body.get("note")
        if (label is not None and not isinstance(label, str)) or (note is not None and not isinstance(note, str)):
            return JSONResponse({"error": "label and note are text"}, status_code=400)
        job = store().edit(job.id, label=label, note=note)
        assert job is not None
        return JSONResponse(job_json(job))

    async def _delete(request: Request, job: JobRow) -> Response:
        if job.status == "running":
            return error(request, 409, "this photo is being measured; delete it when it is done")
        store().delete(job)
        runner().forget_exports(job.id)
        if _wants_json(request):
            return JSONResponse({"deleted": job.id})
        return RedirectResponse("/history", status_code=303)

    async def edit_form(request: Request) -> Response:
        job = job_or_404(request)
        if job is None:
            return error(request, 404, "no such measurement (it may have been deleted)")
        form = await _small_form(request)
        store().edit(job.id, label=form.get("label"), note=form.get("note"))
        return RedirectResponse("/history" if form.get("next") == "history" else f"/jobs/{job.id}", status_code=303)

    async def delete_form(request: Request) -> Response:
        job = job_or_404(request)
        if job is None:
            return error(request, 404, "no such measurement (it may have been deleted)")
        return await _delete(request, job)

    async def history_page(request: Request) -> Response:
        query = clean_text(request.query_params.get("q", ""), LABEL_MAX)
        jobs = store().history(query)
        summaries = {j.id: _summary(store().parts(j)) for j in jobs if j.status == "done"}
        return page("history.html.j2", request, title="History", jobs=jobs, query=query, summaries=summaries)

    async def history_api(request: Request) -> Response:
        jobs = store().history(request.query_params.get("q", ""))
        return JSONResponse({"jobs": [job_json(j) for j in jobs]})

    async def job_file(request: Request) -> Response:
        job = job_or_404(request)
        name = request.path_params["name"]
        if job is None or name not in ("overlay.jpg", "thumb.jpg") or job.status != "done":
            return error(request, 404, "no such picture")
        path = store().dir / job.out_dir / name
        if not path.is_file():
            return error(request, 404, "no such picture")
        return FileResponse(path, media_type="image/jpeg")

    async def download(request: Request) -> Response:
        job = job_or_404(request)
        kind = request.path_params["kind"]
        if job is None or kind not in DOWNLOADS:
            return error(request, 404, "no such download")
        if job.status != "done":
            return error(request, 409, "this photo has no result yet")
        name, media, on_demand = DOWNLOADS[kind]
        path = store().dir / job.out_dir / name
        if on_demand and not path.is_file():
            try:
                await runner().export(job, kind, job.label or f"scanmass measurement {job.id}")
            except ScanmassError as exc:
                return error(request, 500, str(exc))
        if store().get(job.id) is None or not path.is_file():
            return error(request, 404, "no such download")
        stem = safe_name(job.label.replace("/", "_").replace("\\", "_").rsplit(".", 1)[0]) or "scanmass"
        filename = f"{stem}-{job.id}.{kind}"
        return FileResponse(
            path, media_type=media, headers={"Content-Disposition": f'attachment; filename="{filename}"'}
        )

    static_dir = Path(__file__).resolve().parent / "static"
    routes = [
        Route("/", index),
        Route("/history", history_page),
        Route("/jobs/{job_id:int}", job_page),
        Route("/jobs/{job_id:int}/edit", edit_form, methods=["POST"]),
        Route("/jobs/{job_id:int}/delete", delete_form, methods=["POST"]),
        Route("/jobs/{job_id:int}/download/{kind}", download),
        Route("/jobs/{job_id:int}/{name}", job_file),
        Route("/api/jobs", upload, methods=["POST"]),
        Route("/api/jobs", history_api, methods=["GET"]),
        Route("/api/jobs/{job_id:int}", job_api, methods=["GET", "PATCH", "DELETE"]),
        Mount("/static", StaticFiles(directory=static_dir), name="static"),
    ]
    app = Starlette(routes=routes, lifespan=lifespan)
    app.state.serve = state
    return Guard(app, config)


def _wants_json(request: Any) -> bool:
    return (
        "application/json" in request.headers.get("accept", "")
        or request.url.path.startswith("/api/")
        and ("text/html" not in request.headers.get("accept", ""))
    )


async def _small_body(request: Any, limit: int = 16384) -> bytes:
    body = b""
    async for chunk in request.stream():
        body += chunk
        if len(body) > limit:
            raise ValueError("too long")
    return body


async def _small_form(request: Any) -> dict[str, str]:
    try:
        text = (await _small_body(request, LABEL_MAX * 8 + NOTE_MAX * 8)).decode("utf-8", "replace")
    except ValueError:
        return {}
    return {k: v[0] for k, v in parse_qs(text, keep_blank_values=True).items()}


def _summary(parts: list[dict[str, Any]]) -> dict[str, Any]:
    if not parts:
        return {"parts": 0}
    first = parts[0]
    return {
        "parts": len(parts),
        "area_mm2": first.get("area_mm2"),
        "area_u_mm2": first.get("area_u_mm2"),
        "mass_g": first.get("mass_g"),
        "mass_u_g": first.get("mass_u_g"),
    }


def _holes(result_text: str | None) -> list[dict[str, Any]]:
    """Each part's holes (label, centre, diameter) from the stored result document."""
    if not result_text:
        return []
    doc = json.loads(result_text)
    out = []
    for part in doc.get("parts", []):
        for i, hole in enumerate(part.get("holes", []), start=1):
            out.append(
                {
                    "part": part.get("label"),
                    "hole": hole.get("label", i),
                    "centre": hole.get("circle_centre_mm"),
                    "d": hole.get("diameter_mm"),
                    "d_u": hole.get("diameter_u_mm"),
                }
            )
    return out
