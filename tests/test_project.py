"""Project-level promises: the README's commands, CI, and a fast ``--help``."""

from __future__ import annotations

import re
import subprocess
import sys

from conftest import ROOT


def _code_lines(text: str) -> list[str]:
    out, inside = [], False
    for line in text.splitlines():
        if line.startswith("```"):
            inside = not inside
            continue
        if inside:
            out.append(line.lstrip("$ ").strip())
    return out


def test_readme_test_command_is_what_ci_runs():
    """The README's test command and .ci/run's must be the same line (common practice, no source)."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    commands = [c for c in _code_lines(readme) if "pytest" in c]
    assert commands, "README shows no test command"
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert commands[0] in ci.splitlines()


def test_help_imports_no_heavy_library():
    """``lakebalance --help`` must not import pandas, matplotlib, geopandas, scipy or statsmodels."""
    code = (
        "import sys, contextlib, io\n"
        "from lakebalance.cli import main\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        "    try:\n"
        "        main(['--help'])\n"
        "    except SystemExit:\n"
        "        pass\n"
        "heavy = [m for m in ('pandas','matplotlib','geopandas','scipy','statsmodels','pint') "
        "if m in sys.modules]\n"
        "print(','.join(heavy))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"--help imported: {out.stdout.strip()}"


def test_version_flag():
    out = subprocess.run(
        [sys.executable, "-m", "lakebalance", "--version"], capture_output=True, text=True
    )
    assert out.returncode == 0
    assert re.fullmatch(r"lakebalance \d+\.\d+\.\d+\s*", out.stdout)
