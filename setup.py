"""Build step that pyproject.toml cannot express: ship the demo data inside the wheel.

``demo_materials/catalog.csv`` and ``sweeps.csv`` stay the one source; the wheel gets
copies in ``engine/demo_data/``, where ``engine.library.demo`` looks when no checkout is beside it.
Everything else about the package is in pyproject.toml.
"""

from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py

DEMO_SOURCE = Path("demo_materials")
DEMO_FILES = ("catalog.csv", "sweeps.csv", "amplitude.csv")
DEMO_TARGET = Path("engine") / "demo_data"


class BuildWithDemoData(build_py):
    """``build_py`` that also copies the demo catalog and sweeps into the package."""

    def run(self):
        super().run()
        target = Path(self.build_lib) / DEMO_TARGET
        self.mkpath(str(target))
        for name in DEMO_FILES:
            self.copy_file(str(DEMO_SOURCE / name), str(target / name))

    def get_outputs(self, include_bytecode=True):
        extra = [str(Path(self.build_lib) / DEMO_TARGET / name) for name in DEMO_FILES]
        return super().get_outputs(include_bytecode) + extra

    def get_source_files(self):
        # Listed here so that a source distribution carries them too.
        return super().get_source_files() + [str(DEMO_SOURCE / name) for name in DEMO_FILES]


setup(cmdclass={"build_py": BuildWithDemoData})
