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
# room -> rooms (under probewise., the folder server/) it may import; besides, every room but
# the core may use the small top-level modules below.
ALLOWED = {
    "core": {"core"},
    "io": {"io", "core"},
    "store": {"store", "io"},
    "app": {"app", "core", "io", "store"},
    "web": {"web", "app", "core", "io", "store"},
    "commands": {"commands", "app", "core", "io", "store"},
}
# Small top-level modules every room may use.
SHARED_MODULES = {"errors", "caution", "resources", "numbers"}
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
    if parts[0] != "probewise" or len(parts) < 2:
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
            if target is None or (target in SHARED_MODULES and room != "core"):
                continue
            if (rel, target) in EXCEPTIONS:
                continue
            assert target in ALLOWED[room], f"{rel} imports {name} (room {target})"


def test_pages_do_not_import_pages():
    for path in (SERVER / "web").glob("routes_*.py"):
        for name, _ in imports_of(path):
            module = name.split(".")
            if len(module) >= 3 and module[:2] == ["probewise", "web"]:
                assert not module[2].startswith("routes_"), f"{path.name} imports {name}"


def test_layer_check_sees_a_forbidden_import(tmp_path):
    """The checker itself: a web module importing a command is caught."""
    bad = tmp_path / "bad.py"
    bad.write_text("from probewise.commands.evaluate import run\n")
    targets = [room_of(name) for name, _ in imports_of(bad)]
    assert "commands" in targets and "commands" not in ALLOWED["web"]


def test_nothing_imports_the_folder_name():
    """The installed package is ``probewise`` (the folder ``server/`` mapped to it): an import
    of ``server.`` would work in a clone and fail in a wheel."""
    for path in sorted(SERVER.rglob("*.py")):
        for name, _ in imports_of(path):
            assert name.split(".")[0] != "server", f"{path.relative_to(SERVER)} imports {name}"
