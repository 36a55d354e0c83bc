"""A writer killed with SIGKILL mid-stream loses nothing it committed and corrupts nothing.

The child process saves revisions in a loop and prints each revision number after its
transaction has committed; the parent kills it at a random point, then checks the file.
"""

import os
import random
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from probewise.store import create_project, get_revision, list_revisions, open_db

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]

CHILD = r"""
import copy, json, sys
sys.path[:0] = [sys.argv[1]]
from probewise.store import get_project, open_db, save_project

db = open_db(sys.argv[2])
project_id = int(sys.argv[3])
model = json.loads(open(sys.argv[4]).read())
revision = get_project(db, project_id).revision
while True:
    edited = copy.deepcopy(model)
    edited["name"] = f"Revision {revision + 1}"
    revision = save_project(db, project_id, edited, revision, f"step {revision + 1}")
    print(revision, flush=True)
"""


@pytest.mark.skipif(sys.platform == "win32", reason="SIGKILL is POSIX")
def test_sigkill_mid_write_loses_nothing_committed(tmp_path, tiny, tiny_path):
    path = tmp_path / "p.db"
    db = open_db(path)
    project_id = create_project(db, {**tiny, "name": "Revision 1"})
    db.close()

    rng = random.Random(20240611)
    reported = [1]
    for _ in range(3):
        child = subprocess.Popen(
            [
                sys.executable,
                "-c",
                CHILD,
                str(ROOT),
                str(path),
                str(project_id),
                str(tiny_path),
            ],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        wanted = rng.randint(5, 40)
        seen = 0
        while seen < wanted:
            line = child.stdout.readline()
            if not line:
                break
            reported.append(int(line))
            seen += 1
        os.kill(child.pid, signal.SIGKILL)
        rest, errors = child.communicate()
        assert seen == wanted, f"the writer stopped early: {errors}"
        assert child.returncode == -signal.SIGKILL
        reported += [int(n) for n in rest.split()]

    db = open_db(path)
    try:
        assert db.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        assert db.execute("PRAGMA foreign_key_check").fetchall() == []
        numbers = [r.number for r in list_revisions(db, project_id)]
        assert numbers == list(range(1, len(numbers) + 1))
        assert reported == sorted(set(reported))
        assert set(reported) <= set(numbers)
        for number in reported:
            assert get_revision(db, project_id, number)["name"] == f"Revision {number}"
        # each killed writer may have committed one revision it had no time to print
        assert len(numbers) - len(reported) <= 3
    finally:
        db.close()
