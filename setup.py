"""Build hook: the wheel carries the templates, static files and demo project.

They stay top-level folders in the repository; ``build_py`` copies them into
``server/_files`` of the built package, where ``server.resources`` finds them.
"""

import shutil
from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py

ROOT = Path(__file__).resolve().parent
SHIPPED = ("templates", "static", "seed_data")


class BuildWithFiles(build_py):
    def run(self):
        super().run()
        target = Path(self.build_lib) / "server" / "_files"
        for name in SHIPPED:
            shutil.copytree(ROOT / name, target / name, dirs_exist_ok=True)


setup(cmdclass={"build_py": BuildWithFiles})
