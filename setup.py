"""Build step of the wheel: the invented demo data ship inside the package.

Everything else is in pyproject.toml. A wheel (``pip install .``) copies ``data_demo/`` to
``lakebalance/_demo/`` so that ``lakebalance demo`` runs after a normal install; an editable
install reads ``data_demo/`` of the checkout instead.
"""

from __future__ import annotations

import shutil
from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py

ROOT = Path(__file__).resolve().parent


class BuildWithDemo(build_py):
    """``build_py`` that also copies the demo data (files the generator wrote, and the generator)."""

    def run(self) -> None:
        super().run()
        if getattr(self, "editable_mode", False):
            return
        target = Path(self.build_lib) / "lakebalance" / "_demo"
        shutil.copytree(
            ROOT / "data_demo",
            target,
            ignore=shutil.ignore_patterns("__pycache__", "*.pyc", ".*"),
            dirs_exist_ok=True,
        )


setup(cmdclass={"build_py": BuildWithDemo})
