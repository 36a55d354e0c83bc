"""The numerical core stays pure: no web, store or GIS library may be imported from it."""

import ast
from pathlib import Path

CORE = Path(__file__).resolve().parents[1] / "server" / "core"
FORBIDDEN = {"fastapi", "jinja2", "sqlite_utils", "geopandas", "starlette", "pydantic", "shapely"}


def imported_roots(path: Path) -> set[str]:
    roots = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            roots |= {a.name.split(".")[0] for a in node.names}
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            roots.add(node.module.split(".")[0])
    return roots


def test_core_imports_only_numerics():
    files = sorted(CORE.rglob("*.py"))
    assert files
    for path in files:
        bad = imported_roots(path) & FORBIDDEN
        assert not bad, f"{path.name} imports {sorted(bad)}"
