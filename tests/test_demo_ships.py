"""``lakebalance demo`` works after a normal (non-editable) install from a wheel: the invented demo
data ship inside the package (setup.py copies data_demo/ into lakebalance/_demo/).

The wheel is built with pip and installed into a folder of its own (``--target``, no
dependencies: those come from this environment); the demo then runs from another folder, with
that copy first on the path and no source checkout in sight.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def installed(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("wheel")
    build = subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(tmp), str(ROOT)],
        capture_output=True, text=True, timeout=600,
    )  # fmt: skip
    if build.returncode != 0:
        pytest.fail(f"pip wheel failed: {build.stderr[-2000:]}")
    wheel = next(tmp.glob("lakebalance-*.whl"))
    target = tmp / "site"
    subprocess.run(
        [sys.executable, "-m", "pip", "install", "--no-deps", "-q", "--target", str(target),
         str(wheel)],
        check=True, capture_output=True, timeout=600,
    )  # fmt: skip
    return target


def test_demo_runs_from_the_installed_wheel(installed, tmp_path):
    env = dict(os.environ, PYTHONPATH=str(installed), MPLBACKEND="Agg")
    where = subprocess.run(
        [sys.executable, "-c", "import lakebalance; print(lakebalance.__file__)"],
        cwd=tmp_path, env=env, capture_output=True, text=True, check=True,
    )  # fmt: skip
    assert where.stdout.strip().startswith(str(installed))  # the wheel's copy, not the checkout
    run = subprocess.run(
        [sys.executable, "-m", "lakebalance", "demo", "--out", "demo_report"],
        cwd=tmp_path, env=env, capture_output=True, text=True, timeout=900,
    )  # fmt: skip
    assert run.returncode == 0, run.stderr[-2000:]
    out = tmp_path / "demo_report"
    assert (out / "report.html").stat().st_size > 100_000
    summary = json.loads((out / "summary.json").read_text())
    assert summary["site"].startswith("Vessilow Reservoir")
    assert (installed / "lakebalance" / "_demo" / "site.toml").is_file()
