"""``saltplan serve``: the browser workbench on this machine."""
from __future__ import annotations

import ipaddress
import secrets
import socket

import click

LOOPBACK = ("127.0.0.1", "localhost", "::1")


def is_loopback(host: str) -> bool:
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def free_port(host: str) -> int:
    with socket.socket(socket.AF_INET6 if ":" in host else socket.AF_INET) as s:
        s.bind((host, 0))
        return s.getsockname()[1]


@click.command()
@click.option("--host", default="127.0.0.1", show_default=True,
              help="Address to listen on. Any address beyond this machine needs the token "
                   "printed at start-up.")
@click.option("--port", type=click.IntRange(0, 65535), default=0, show_default=True,
              help="Port (0: a free one).")
def serve(host, port):
    """Open the browser workbench: plan, screen, results and decision pages."""
    import uvicorn

    from ..web import create_app

    token = None if is_loopback(host) else secrets.token_urlsafe(24)
    port = port or free_port(host)
    shown = f"[{host}]" if ":" in host else host
    url = f"http://{shown}:{port}/" + (f"?token={token}" if token else "")
    if token:
        click.echo(f"listening beyond this machine on {host}: every browser needs the token "
                   f"below (anyone with it can use the workbench)\ntoken: {token}")
    click.echo(f"saltplan workbench: {url}  (Ctrl+C stops it)")
    uvicorn.run(create_app(token=token), host=host, port=port, log_level="warning",
                access_log=False)
