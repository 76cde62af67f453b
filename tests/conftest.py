"""Shared fixtures. Tests import the public API as a user would."""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from hypothesis import settings

os.environ.setdefault("MPLBACKEND", "Agg")

# CI runs the property tests on a fixed sequence of examples, so that a green run is repeatable;
# locally hypothesis explores new examples each run (and keeps failures in .hypothesis/).
settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data_demo"


@pytest.fixture
def demo_site_path() -> Path:
    """The bundled demo site file (invented reservoir)."""
    path = DEMO / "site.toml"
    if not path.exists():
        pytest.fail("data_demo/site.toml is missing: run data_demo/make_demo.py")
    return path


@pytest.fixture
def write(tmp_path: Path):
    """Write a text file under tmp_path and return its path."""

    def _write(name: str, text: str, encoding: str = "utf-8") -> Path:
        p = tmp_path / name
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_text(text, encoding=encoding)
        return p

    return _write
