"""The wheel as a user gets it: built from the checkout, installed into a fresh virtual
environment, ``probewise serve`` started from an unrelated folder on a temporary database, and
``/`` fetched (the demo project listed). What ``.ci/wheel-smoke`` does, from pytest.

Dependencies are not downloaded again: the fresh environment sees the running interpreter's
installed packages through a ``.pth`` line, and the test checks that every requirement the
wheel declares is importable there. ``probewise`` itself must come from the wheel (the
running environment's own copy, editable or not, is not on the fresh environment's path).
Building the wheel needs pip's build isolation (setuptools from the package index).
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import sysconfig
import time
from pathlib import Path

import httpx
import pytest

from probewise.local_server import STARTUP_DEADLINE_S, free_port

ROOT = Path(__file__).resolve().parents[1]


def run(*command: str | Path, cwd: Path, env: dict | None = None) -> str:
    done = subprocess.run(
        [str(c) for c in command], cwd=cwd, env=env, capture_output=True, text=True, timeout=600
    )
    assert done.returncode == 0, f"{command}: {done.stdout}\n{done.stderr}"
    return done.stdout


@pytest.mark.slow
def test_installed_wheel_serves_the_projects_page(tmp_path):
    run(
        sys.executable,
        "-m",
        "pip",
        "wheel",
        "-q",
        "--no-deps",
        "-w",
        tmp_path / "dist",
        ROOT,
        cwd=tmp_path,
    )
    wheel = next((tmp_path / "dist").glob("probewise-*.whl"))
    venv = tmp_path / "venv"
    run(sys.executable, "-m", "venv", venv, cwd=tmp_path)
    python = venv / "bin" / "python"
    run(python, "-m", "pip", "install", "-q", "--no-deps", "--no-index", wheel, cwd=tmp_path)
    site = Path(
        run(
            python, "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])", cwd=tmp_path
        ).strip()
    )
    (site / "zz-dependencies.pth").write_text(sysconfig.get_paths()["purelib"] + "\n")

    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    env["PYTHONUNBUFFERED"] = "1"
    where = run(
        python, "-c", "import probewise; print(probewise.__file__)", cwd=tmp_path, env=env
    ).strip()
    assert where.startswith(str(site)), where  # the wheel's copy, not the checkout's
    missing = run(
        python,
        "-c",
        (
            "import importlib.metadata as m, importlib.util as u, re\n"
            "names = {'scikit-learn': 'sklearn', 'sqlite-utils': 'sqlite_utils',"
            " 'python-multipart': 'multipart', 'python-ags4': 'python_ags4', 'pyyaml': 'yaml'}\n"
            "for req in m.requires('probewise') or []:\n"
            "    if 'extra ==' in req: continue\n"
            "    name = re.split(r'[ ;<>=!~\\[]', req)[0].lower()\n"
            "    mod = names.get(name, name.replace('-', '_'))\n"
            "    if u.find_spec(mod) is None: print(name)\n"
        ),
        cwd=tmp_path,
        env=env,
    )
    assert missing.strip() == "", f"declared but not importable: {missing}"

    port = free_port()
    folder = tmp_path / "elsewhere"
    folder.mkdir()
    log = (tmp_path / "serve.log").open("w+")
    process = subprocess.Popen(
        [venv / "bin" / "probewise", "serve", "--db", tmp_path / "smoke.db", "--port", str(port)],
        cwd=folder,
        stdout=log,
        stderr=subprocess.STDOUT,
        env=env,
    )
    try:
        page = None
        deadline = time.monotonic() + STARTUP_DEADLINE_S
        while time.monotonic() < deadline and process.poll() is None:
            try:
                page = httpx.get(f"http://127.0.0.1:{port}/", timeout=2.0)
                break
            except httpx.TransportError:
                time.sleep(0.3)
        log.seek(0)
        assert page is not None, f"the server did not answer: {log.read()}"
        assert page.status_code == 200
        assert re.search(r"Fenmere", page.text), "the projects page lacks the demo project"
        assert httpx.get(f"http://127.0.0.1:{port}/static/css/print.css").status_code == 200
    finally:
        process.terminate()
        process.wait(timeout=30)
        log.close()
