"""Settings of the bench page, its access token and the addresses it is reached at.

Standard library only (the command line imports this module to build the settings).
"""

from __future__ import annotations

import ipaddress
import math
import os
import secrets
import socket
from dataclasses import dataclass, replace
from pathlib import Path

from scanmass.errors import OptionError
from scanmass.options import DEFAULT_MAX_PIXELS, check_max_pixels

__all__ = [
    "DEFAULT_JOB_TIMEOUT_S",
    "DEFAULT_MAX_UPLOAD_MB",
    "DEFAULT_PORT",
    "TOKEN_BYTES",
    "ServeConfig",
    "is_loopback",
    "lan_addresses",
    "new_token",
    "page_urls",
    "qr_text",
]

#: Default port of ``scanmass serve`` (any free port works; 0 picks one).
DEFAULT_PORT = 8350
#: Default upload limit, MB (10^6 bytes).
DEFAULT_MAX_UPLOAD_MB = 50.0
#: Default time limit of one job, s.
DEFAULT_JOB_TIMEOUT_S = 300.0
#: Random bytes in an access token: 32 bytes = 256 bits (at least 128 are required).
TOKEN_BYTES = 32


def new_token() -> str:
    """A fresh random access token (URL-safe text, 256 bits from :mod:`secrets`).

    Examples
    --------
    >>> len(new_token()) >= 43 and new_token() != new_token()
    True
    """
    return secrets.token_urlsafe(TOKEN_BYTES)


def is_loopback(host: str | None) -> bool:
    """True for a loopback address or the name ``localhost`` (127.0.0.0/8, ::1).

    Examples
    --------
    >>> is_loopback("127.0.0.1"), is_loopback("::1"), is_loopback("localhost"), is_loopback("192.168.1.20")
    (True, True, True, False)
    """
    if not host:
        return False
    host = host.strip("[]")
    if host == "localhost":
        return True
    try:
        address = ipaddress.ip_address(host)
    except ValueError:
        return False
    if isinstance(address, ipaddress.IPv6Address) and address.ipv4_mapped is not None:
        address = address.ipv4_mapped
    return address.is_loopback


def _free_port(host: str) -> int:
    with socket.socket(socket.AF_INET6 if ":" in host else socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind((host, 0))
        return int(s.getsockname()[1])


@dataclass(frozen=True)
class ServeConfig:
    """What ``scanmass serve`` runs with.

    Attributes
    ----------
    store_dir : Path
        Folder of the history: uploaded photos under their content hash, each job's
        outputs, and ``scanmass-batch.sqlite`` (the batch database format, so that
        ``scanmass batch-export`` and ``scanmass report DIR`` read it).
    host, port : str, int
        Where to listen. Loopback unless ``lan``; port 0 picks a free one.
    lan : bool
        Listen on the local network (``host`` defaults to 0.0.0.0) and require the access token.
    token : str or None
        Access token; required from clients beyond loopback (always with ``lan``).
    workers : int
        Worker processes that measure (each one job at a time).
    queue_size : int
        Jobs that may wait for a worker; beyond it uploads get 429 and a retry hint.
    max_upload_bytes : int
        Largest upload accepted, counted while it streams in.
    max_pixels : int
        Largest image (width x height) accepted, as ``measure --max-pixels``.
    shutdown_grace_s : float
        On shutdown, how long the jobs in flight may take to finish before they are
        put back in the queue for the next start.
    max_attempts : int
        Times a job is started before a server that keeps dying during it marks it failed.
    job_timeout_s : float
        Longest a job may measure; beyond it its worker is stopped and started again, and
        the job fails with the reason.
    """

    store_dir: Path = Path("scanmass-serve")
    host: str = "127.0.0.1"
    port: int = DEFAULT_PORT
    lan: bool = False
    token: str | None = None
    workers: int = 1
    queue_size: int = 16
    max_upload_bytes: int = int(DEFAULT_MAX_UPLOAD_MB * 1_000_000)
    max_pixels: int = DEFAULT_MAX_PIXELS
    shutdown_grace_s: float = 30.0
    max_attempts: int = 2
    job_timeout_s: float = DEFAULT_JOB_TIMEOUT_S

    @classmethod
    def build(
        cls,
        *,
        store_dir: str | os.PathLike = "scanmass-serve",
        host: str | None = None,
        port: int = DEFAULT_PORT,
        lan: bool = False,
        workers: int | None = None,
        queue_size: int = 16,
        max_upload_mb: float = DEFAULT_MAX_UPLOAD_MB,
        max_pixels: int = DEFAULT_MAX_PIXELS,
        token: str | None = None,
        job_timeout_s: float = DEFAULT_JOB_TIMEOUT_S,
    ) -> ServeConfig:
        """Check the command-line values and return the settings (a token made when needed).

        Raises
        ------
        OptionError
            A value out of range, or a host beyond loopback without ``lan``.

        Examples
        --------
        >>> c = ServeConfig.build(store_dir="h", port=8000)
        >>> c.host, c.lan, c.token is None
        ('127.0.0.1', False, True)
        >>> ServeConfig.build(host="0.0.0.0")
        Traceback (most recent call last):
        ...
        scanmass.errors.OptionError: listening on 0.0.0.0 reaches beyond this computer; add --lan (which turns on the access token) or use --host 127.0.0.1
        """
        if host is None:
            host = "0.0.0.0" if lan else "127.0.0.1"
        if not lan and not is_loopback(host):
            raise OptionError(
                f"listening on {host} reaches beyond this computer; add --lan (which turns on the access token) "
                "or use --host 127.0.0.1"
            )
        if isinstance(port, bool) or not isinstance(port, int) or not 0 <= port <= 65535:
            raise OptionError(f"port {port!r} must be a whole number from 0 to 65535, e.g. --port 8350")
        if workers is None:
            workers = max(1, min(4, (os.cpu_count() or 2) - 1))
        if isinstance(workers, bool) or not isinstance(workers, int) or not 1 <= workers <= 64:
            raise OptionError(f"workers {workers!r} must be a whole number from 1 to 64, e.g. --workers 2")
        if isinstance(queue_size, bool) or not isinstance(queue_size, int) or not 1 <= queue_size <= 10_000:
            raise OptionError(f"queue size {queue_size!r} must be a whole number from 1 to 10000, e.g. --queue 16")
        if not (isinstance(max_upload_mb, (int, float)) and math.isfinite(max_upload_mb) and max_upload_mb > 0):
            raise OptionError(f"upload limit {max_upload_mb!r} MB must be a positive number, e.g. --max-upload 50")
        check_max_pixels(max_pixels)
        if isinstance(job_timeout_s, bool) or not (
            isinstance(job_timeout_s, (int, float)) and math.isfinite(job_timeout_s) and 1 <= job_timeout_s <= 86_400
        ):
            raise OptionError(f"job time limit {job_timeout_s!r} s must be from 1 to 86400, e.g. --job-timeout 300")
        if token is not None and len(token) < 22:  # 22 URL-safe characters carry 132 bits
            raise OptionError("the access token must be at least 22 characters (128 bits); leave it out to get one")
        if token is None and lan:
            token = new_token()
        if port == 0:
            port = _free_port("127.0.0.1" if is_loopback(host) else host)
        return cls(
            store_dir=Path(store_dir).expanduser(),
            host=host,
            port=port,
            lan=lan,
            token=token,
            workers=workers,
            queue_size=queue_size,
            max_upload_bytes=int(max_upload_mb * 1_000_000),
            max_pixels=max_pixels,
            job_timeout_s=float(job_timeout_s),
        )

    def updated(self, **changes: object) -> ServeConfig:
        """A copy with some fields changed."""
        return replace(self, **changes)  # type: ignore[arg-type]

    @property
    def token_required(self) -> bool:
        """True when requests must carry the token (always beyond loopback)."""
        return self.lan or self.token is not None


def lan_addresses() -> list[str]:
    """This computer's IPv4 addresses on its networks (not loopback), from its own name.

    No packet is sent: the addresses come from the resolver's view of the host name.
    """
    found: list[str] = []
    try:
        infos = socket.getaddrinfo(socket.gethostname(), None, socket.AF_INET, socket.SOCK_STREAM)
    except OSError:
        infos = []
    for info in infos:
        address = str(info[4][0])
        if not is_loopback(address) and address not in found:
            found.append(address)
    return found


def page_urls(config: ServeConfig) -> list[str]:
    """The page's address(es), with the token when one is needed (for the terminal and the QR code)."""
    suffix = f"/?token={config.token}" if config.token else "/"
    if config.lan and config.host in ("0.0.0.0", "::"):
        hosts = lan_addresses() or ["127.0.0.1"]
    else:
        hosts = [config.host]
    return [f"http://{f'[{h}]' if ':' in h else h}:{config.port}{suffix}" for h in hosts]


def qr_text(url: str) -> str:
    """The URL as a QR code drawn with text block characters, for a terminal."""
    import io

    import segno

    buf = io.StringIO()
    segno.make(url, error="m").terminal(out=buf, compact=True, border=2)
    return buf.getvalue()
