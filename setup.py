"""Build hook: the wheel carries the templates, static files and demo project.

They stay top-level folders in the repository; ``build_py`` copies them into
``probewise/_files`` of the built package, where ``probewise.resources`` finds them.
"""

import shutil
from pathlib import Path

from setuptools import find_packages, setup
from setuptools.command.build_py import build_py

ROOT = Path(__file__).resolve().parent
SHIPPED = ("templates", "static", "seed_data")


class BuildWithFiles(build_py):
    def run(self):
        # A build folder left by an earlier build (another package layout) must not leak into
        # this wheel: start from an empty one.
        shutil.rmtree(self.build_lib, ignore_errors=True)
        super().run()
        target = Path(self.build_lib) / "probewise" / "_files"
        for name in SHIPPED:
            shutil.copytree(ROOT / name, target / name, dirs_exist_ok=True)


# The repository keeps its rooms under server/; installed, the package is named probewise so it
# cannot collide with another top-level "server".
PACKAGES = ["probewise"] + [f"probewise.{name}" for name in find_packages("server")]

setup(
    packages=PACKAGES,
    package_dir={"probewise": "server"},
    cmdclass={"build_py": BuildWithFiles},
)
