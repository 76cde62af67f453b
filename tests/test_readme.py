"""The README's usage lines work as written: every command and option of its table exists, its
error line is what the tool prints, and its Python example runs on the demo (common practice, no
source: documentation that is executed cannot drift from the code)."""

from __future__ import annotations

import re
import warnings
from pathlib import Path

import pytest

from lakebalance.cli import COMMANDS, main

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _table_rows() -> list[str]:
    return re.findall(r"^\| `(lakebalance [^`]+)` \|", README, flags=re.M)


def test_the_usage_table_lists_every_command():
    listed = {row.split()[1] for row in _table_rows()}
    assert listed == set(COMMANDS)


@pytest.mark.parametrize("row", _table_rows())
def test_every_option_of_a_usage_line_exists(row, capsys):
    command = row.split()[1]
    with pytest.raises(SystemExit) as done:
        main([command, "--help"])
    assert done.value.code == 0
    text = capsys.readouterr().out
    for option in re.findall(r"(--[a-z][a-z-]*)", row):
        assert option in text, f"{row}: {option} is not an option of '{command}'"


def test_the_error_line_is_what_the_tool_prints(tmp_path, capsys):
    line = re.search(r"^(error: /data/lakes/(\S+?):(\d+): .*)$", README, flags=re.M)
    assert line, "the README shows an error line"
    text, name, number = line.group(1), line.group(2), int(line.group(3))
    site = tmp_path / name
    body = ["[site]", 'name = "Quellmere (invented)"', "# a comment", "seed = 1"]
    body.insert(number - 1, "water_yearstart = 10")
    site.write_text("\n".join(body) + "\n", encoding="utf-8")
    assert main(["check", str(site)]) == 2
    printed = capsys.readouterr().err.strip()
    assert printed == text.replace(f"/data/lakes/{name}", str(site))


def test_the_python_example_runs_on_the_demo(monkeypatch):
    block = re.search(r"```python\n(.*?)```", README, flags=re.S).group(1)
    monkeypatch.chdir(ROOT)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        exec(compile(block, "README.md", "exec"), {"__name__": "readme"})
