"""``testplan serve``: the bench page, served from the store by uvicorn."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from testplan.cli.common import DbOption, say
from testplan.cli.errors import reports_errors
from testplan.errors import RecordError

LOOPBACK = ("127.0.0.1", "::1", "localhost")


@reports_errors
def serve_command(
    db: DbOption = None,
    host: Annotated[str, typer.Option("--host", help="Address to listen on.")] = "127.0.0.1",
    port: Annotated[int, typer.Option("--port", help="TCP port.", min=1, max=65535)] = 8350,
    certfile: Annotated[
        Path | None, typer.Option("--certfile", help="TLS certificate (PEM) for a LAN address.")
    ] = None,
    keyfile: Annotated[
        Path | None, typer.Option("--keyfile", help="TLS private key (PEM) for --certfile.")
    ] = None,
    plain_http_on_lan: Annotated[
        bool,
        typer.Option(
            "--plain-http-on-lan",
            help="Serve a LAN address without TLS (passwords cross the network in clear).",
        ),
    ] = False,
    idle_minutes: Annotated[
        int, typer.Option("--idle-minutes", help="Log out after this long idle.", min=1)
    ] = 30,
) -> None:
    """Serve the bench page: today's runs, start, logger files, observations, checks.

    Loopback only unless --certfile/--keyfile (TLS) or --plain-http-on-lan is given.

    Example: testplan serve --db lab.db --port 8350
    """
    if (certfile is None) != (keyfile is None):
        raise RecordError("TLS needs both files", key="--certfile", fix="give --keyfile too")
    tls = certfile is not None
    if host not in LOOPBACK and not tls:
        if not plain_http_on_lan:
            raise RecordError(
                f"{host} is not a loopback address and no TLS files are given",
                key="--host",
                fix="give --certfile and --keyfile, or --plain-http-on-lan on a trusted LAN",
            )
        say(
            "warning: serving plain HTTP on a network address: passwords and sessions "
            "can be read by anyone on that network"
        )
    import uvicorn

    from testplan.cli.common import open_for_reading
    from testplan.web.app import make_app, remove_uploads

    store = open_for_reading(db)
    app = make_app(store, secure_cookies=tls, idle_minutes=idle_minutes)
    scheme = "https" if tls else "http"
    say(f"store: {store.name}")
    say(f"bench page: {scheme}://{host}:{port}/")
    try:
        uvicorn.run(
            app,
            host=host,
            port=port,
            ssl_certfile=str(certfile) if certfile else None,
            ssl_keyfile=str(keyfile) if keyfile else None,
            log_level="warning",
        )
    finally:
        remove_uploads(app)  # logger files uploaded but never imported
