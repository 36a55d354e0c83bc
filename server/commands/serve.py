"""`probewise serve`: run the web app on this machine (127.0.0.1:8000 unless told otherwise).

A fresh database gets the invented demo project (unless --no-seed). Binding to any address but
loopback exposes every project to the network, so that prints a warning.
"""

from __future__ import annotations

import argparse
import ipaddress
import socket
import sys
from pathlib import Path

from probewise.errors import InputError

DEFAULT_HOST = "127.0.0.1"
DEFAULT_PORT = 8000
WILDCARD_HOSTS = {"0.0.0.0", "::", ""}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--db",
        metavar="PATH",
        help="SQLite database file (default: the per-user database; $PROBEWISE_DB overrides)",
    )
    parser.add_argument(
        "--host",
        default=DEFAULT_HOST,
        help=f"address to listen on (default {DEFAULT_HOST}: this machine only)",
    )
    parser.add_argument(
        "--port", type=int, default=DEFAULT_PORT, help=f"port (default {DEFAULT_PORT})"
    )
    parser.add_argument(
        "--no-seed",
        action="store_true",
        help="do not load the invented demo project into an empty database",
    )


def is_loopback(host: str) -> bool:
    if host.lower() == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def url_of(host: str, port: int) -> str:
    shown = "127.0.0.1" if host in WILDCARD_HOSTS else host
    if ":" in shown and not shown.startswith("["):
        shown = f"[{shown}]"
    return f"http://{shown}:{port}/"


def own_names() -> set[str]:
    """This machine's names and addresses, accepted as Host when bound to every interface."""
    names = {socket.gethostname(), socket.getfqdn()}
    try:
        _, aliases, addresses = socket.gethostbyname_ex(socket.gethostname())
        names.update(aliases)
        names.update(addresses)
    except OSError:
        pass
    return {n for n in names if n}


def check_port_free(host: str, port: int) -> None:
    """Fail early, as bad input, when the address cannot be bound."""
    family = socket.AF_INET6 if ":" in host.strip("[]") else socket.AF_INET
    with socket.socket(family, socket.SOCK_STREAM) as probe:
        probe.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            probe.bind((host.strip("[]"), port))
        except OSError as exc:
            raise InputError(
                "--port", f"cannot listen on {host}:{port}: {exc.strerror or exc}"
            ) from None


def resolve_db_path(value: str | None) -> Path:
    from probewise.store import default_db_path

    if value is None:
        return default_db_path()
    path = Path(value).expanduser()
    if path.is_dir():
        raise InputError("--db", f"{path} is a folder; give the path of a database file")
    if not path.parent.exists():
        raise InputError("--db", f"folder {path.parent} does not exist")
    return path


def run(args: argparse.Namespace) -> int:
    port = args.port
    if not 1 <= port <= 65535:
        raise InputError("--port", f"must be between 1 and 65535, not {port}")
    host = (args.host or "").strip()
    if not host:
        raise InputError("--host", "is empty; give an address such as 127.0.0.1")
    db_path = resolve_db_path(args.db)
    check_port_free(host, port)

    import uvicorn

    from probewise.web.app import create_app

    extra_hosts = own_names() if host in WILDCARD_HOSTS else set()
    if not is_loopback(host):
        sys.stderr.write(
            f"warning: listening on {host}, not on loopback: every project in {db_path} is "
            "open to anyone who can reach this machine over the network. "
            f"Use --host {DEFAULT_HOST} unless that is what you want.\n"
        )
    app = create_app(db_path, bound_host=host, seed=not args.no_seed, extra_hosts=extra_hosts)
    print(f"probewise: serving {url_of(host, port)}", flush=True)
    print(f"probewise: database {db_path}", flush=True)
    print("probewise: press Ctrl+C to stop", flush=True)
    uvicorn.run(app, host=host.strip("[]"), port=port, log_level="info", access_log=False)
    return 0
