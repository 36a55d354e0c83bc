"""The rooms of the code base and the one direction imports flow between them.

core (pure numerics) <- io (file formats) <- store (SQLite) <- app (logic shared by both
doors) <- web (pages) and commands (CLI). The core imports no web, store or GIS library; the
web never imports a command nor a command the web (``serve`` alone starts the web app); a
page (``routes_*``) never imports another page. See DEVELOPERS.md, "Architecture".
"""

import ast
from pathlib import Path

import pytest

SERVER = Path(__file__).resolve().parents[1] / "server"
CORE = SERVER / "core"
FORBIDDEN_IN_CORE = {
    "fastapi",
    "jinja2",
    "sqlite_utils",
    "geopandas",
    "starlette",
    "pydantic",
    "shapely",
    "pyproj",
    "pyogrio",
    "matplotlib",
}
# room -> rooms (under server.) it may import; modules at the top of server/ (errors, caution,
# numbers, cli, local_server) are rooms of their own.
ALLOWED = {
    "core": {"core"},
    "io": {"io", "core", "errors", "caution", "numbers"},
    "store": {"store", "io", "errors", "numbers"},
    "app": {"app", "core", "io", "store", "errors", "caution", "numbers"},
    "web": {"web", "app", "core", "io", "store", "errors", "caution", "numbers"},
    "commands": {"commands", "app", "core", "io", "store", "errors", "caution", "numbers"},
}
# The one door between commands and web: `probewise serve` starts the web app.
EXCEPTIONS = {("commands/serve.py", "web")}


def imports_of(path: Path) -> list[tuple[str, int]]:
    """Absolute module names imported by a file (``from x import y`` gives x and x.y)."""
    out = []
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            out += [(a.name, 0) for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module:
            out.append((node.module, node.level))
            out += [(f"{node.module}.{a.name}", node.level) for a in node.names]
    return out


def room_of(module: str) -> str | None:
    parts = module.split(".")
    if parts[0] != "server" or len(parts) < 2:
        return None
    return parts[1]


def files_of(room: str) -> list[Path]:
    files = sorted((SERVER / room).rglob("*.py"))
    assert files, f"server/{room} has no modules"
    return files


def test_core_imports_only_numerics():
    for path in files_of("core"):
        roots = {name.split(".")[0] for name, level in imports_of(path) if level == 0}
        bad = roots & FORBIDDEN_IN_CORE
        assert not bad, f"{path.name} imports {sorted(bad)}"


@pytest.mark.parametrize("room", sorted(ALLOWED))
def test_imports_flow_one_way(room):
    for path in files_of(room):
        rel = path.relative_to(SERVER).as_posix()
        for name, level in imports_of(path):
            assert level == 0, f"{rel}: relative import of {name}"
            target = room_of(name)
            if target is None or name in ("server.errors", "server.caution"):
                continue
            if (rel, target) in EXCEPTIONS:
                continue
            assert target in ALLOWED[room], f"{rel} imports {name} (room {target})"


def test_pages_do_not_import_pages():
    for path in (SERVER / "web").glob("routes_*.py"):
        for name, _ in imports_of(path):
            module = name.split(".")
            if len(module) >= 3 and module[:2] == ["server", "web"]:
                assert not module[2].startswith("routes_"), f"{path.name} imports {name}"


def test_layer_check_sees_a_forbidden_import(tmp_path):
    """The checker itself: a web module importing a command is caught."""
    bad = tmp_path / "bad.py"
    bad.write_text("from server.commands.evaluate import run\n")
    targets = [room_of(name) for name, _ in imports_of(bad)]
    assert "commands" in targets and "commands" not in ALLOWED["web"]
