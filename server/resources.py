"""Where the app's own files are: templates, static files and the invented demo projects.

From a clone (or an editable install) they are the repository's top-level folders; a wheel
carries copies in ``probewise/_files`` (see setup.py), so ``probewise serve`` works from any
directory after ``pip install .``.
"""

from __future__ import annotations

from pathlib import Path

_PACKAGE = Path(__file__).resolve().parent
_BUNDLED = _PACKAGE / "_files"
FILES_ROOT = _BUNDLED if _BUNDLED.is_dir() else _PACKAGE.parent
TEMPLATES_DIR = FILES_ROOT / "templates"
STATIC_DIR = FILES_ROOT / "static"
DEMO_PROJECT_PATH = FILES_ROOT / "seed_data" / "demo-project.json"
# The demos a fresh database gets, in order: the first is project 1; the second shows the
# levels and site-history rules (seed_data/README.md).
DEMO_PROJECT_PATHS = (DEMO_PROJECT_PATH, FILES_ROOT / "seed_data" / "demo-reclaimed-strip.json")
