"""Running the bench page under uvicorn, and what the terminal shows when it starts."""

from __future__ import annotations

from scanmass.serve.config import ServeConfig, page_urls, qr_text

__all__ = ["banner", "check_free", "run_server"]


def banner(config: ServeConfig, *, qr: bool = True) -> str:
    """The text the command line prints at start: the address(es), the token, a QR code with ``--lan``."""
    urls = page_urls(config)
    lines = [f"scanmass serve: history in {config.store_dir.resolve()}", f"open {urls[0]}"]
    lines += [f"  or {u}" for u in urls[1:]]
    if config.lan:
        lines.append(f"access token: {config.token}")
        lines.append("anyone with this address and token on your network can use the page; stop it with Ctrl-C")
        if qr:
            lines.append("point the phone's camera at the code:")
            lines.append(qr_text(urls[0]))
    else:
        lines.append("loopback only (this computer); add --lan to open it from a phone on the same network")
    return "\n".join(lines)


def check_free(config: ServeConfig) -> None:
    """Raise a one-line error when the port is taken or another process holds the store.

    Raises
    ------
    OutputError
        The store folder cannot be made, another ``scanmass serve`` or ``scanmass batch``
        writes to it, or the port is in use.
    """
    import contextlib
    import socket

    from scanmass.batch.store import _LOCK_NAME
    from scanmass.errors import OutputError

    try:
        config.store_dir.mkdir(parents=True, exist_ok=True)
        fh = open(config.store_dir / _LOCK_NAME, "a+")
    except OSError as exc:
        raise OutputError(
            f"cannot use this folder for the history ({exc.strerror}); choose another --store",
            path=str(config.store_dir),
        ) from None
    with fh:
        try:
            import fcntl

            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
            fcntl.flock(fh.fileno(), fcntl.LOCK_UN)
        except ImportError:  # pragma: no cover - not POSIX
            pass
        except OSError:
            raise OutputError(
                "another 'scanmass serve' or 'scanmass batch' is using this folder; choose another --store",
                path=str(config.store_dir),
            ) from None
    family = socket.AF_INET6 if ":" in config.host else socket.AF_INET
    with contextlib.closing(socket.socket(family, socket.SOCK_STREAM)) as s:
        s.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            s.bind((config.host, config.port))
        except OSError as exc:
            raise OutputError(
                f"cannot listen on {config.host} port {config.port} ({exc.strerror}); choose another with --port, "
                "or --port 0 for any free one"
            ) from None


def run_server(config: ServeConfig) -> None:
    """Serve until Ctrl-C or SIGTERM; jobs in flight finish (or go back in the queue) before it returns.

    Raises
    ------
    OutputError
        See :func:`check_free`.
    """
    import uvicorn

    from scanmass.serve.app import create_app

    check_free(config)
    server = uvicorn.Server(
        uvicorn.Config(
            create_app(config),
            host=config.host,
            port=config.port,
            access_log=False,  # the first request's address holds the token
            log_level="warning",
            lifespan="on",
            server_header=False,
            timeout_graceful_shutdown=int(config.shutdown_grace_s) + 5,
        )
    )
    server.run()
