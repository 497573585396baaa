"""Running the bench page under uvicorn, and what the terminal shows when it starts."""

from __future__ import annotations

from scanmass.serve.config import ServeConfig, page_urls, qr_text

__all__ = ["banner", "run_server"]


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


def run_server(config: ServeConfig) -> None:
    """Serve until Ctrl-C or SIGTERM; jobs in flight finish (or go back in the queue) before it returns."""
    import uvicorn

    from scanmass.serve.app import create_app

    config.store_dir.mkdir(parents=True, exist_ok=True)
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
