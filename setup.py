"""Ships the top-level ``site_template/`` (the default theme) inside the wheel.

The theme lives at the top of the repository so a catalogue author can read it next to their
own overrides; at build time it is copied into the package as ``figfolio/site_template``.
"""
import shutil
from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py


class BuildWithTheme(build_py):
    def run(self) -> None:
        super().run()
        source = Path(__file__).parent / "site_template"
        target = Path(self.build_lib) / "figfolio" / "site_template"
        if source.is_dir():
            shutil.rmtree(target, ignore_errors=True)
            shutil.copytree(source, target, ignore=shutil.ignore_patterns("__pycache__"))


setup(cmdclass={"build_py": BuildWithTheme})
