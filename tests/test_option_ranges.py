"""Every option with a declared range, out of that range in a site file, is an OptionError that
names the option and the line of its key (the options contract of DESIGN.md; issue 13 part 6).

The cases are generated from the options dataclasses themselves, so a new option with a range is
covered as soon as it is declared; a numeric option without a declared range fails the coverage
test below.
"""

from __future__ import annotations

import dataclasses
import math
import typing

import pytest

from lakebalance import config
from lakebalance.errors import ConfigError, OptionError
from lakebalance.outlet.options import OutletComponent

REQUIRED = {  # the keys a section cannot be built without (values need not exist on disk)
    "site": 'name = "Invented Mere"\n',
    "series.stage": 'file = "s.csv"\nunits = "m"\n',
    "outlet.component": 'name = "sill"\n',
}


def _sections():
    out = {name: cls for name, cls in config._TOP_SECTIONS.items()}
    out["series.stage"] = config.SeriesSpec
    out["outlet.component"] = OutletComponent
    return out


def _nested(cls, prefix):
    """(table path, dataclass) of the nested option tables of ``cls`` (e.g. ``flags.cusum``)."""
    hints = typing.get_type_hints(cls)
    for f in dataclasses.fields(cls):
        tp = hints[f.name]
        if dataclasses.is_dataclass(tp) and f.name != "component":
            yield f"{prefix}.{f.name}", tp
            yield from _nested(tp, f"{prefix}.{f.name}")


def _bad_value(meta):
    lo, hi = meta.get("low"), meta.get("high")
    if lo is not None:
        return lo if meta.get("low_open") else lo - 1
    if hi is not None:
        return hi if meta.get("high_open") else hi + 1
    return None


def _cases():
    cases = []
    for section, cls in _sections().items():
        tables = [(section, cls), *_nested(cls, section)]
        for where, tcls in tables:
            hints = typing.get_type_hints(tcls)
            for f in dataclasses.fields(tcls):
                meta = f.metadata
                if not meta or "unit" not in meta:
                    continue
                bad = _bad_value(meta)
                if bad is None:
                    continue
                tp = str(hints[f.name])
                if "list" in tp or "tuple" in tp:
                    bad = [bad]
                cases.append(pytest.param(section, where, f.name, bad, id=f"{where}.{f.name}"))
    return cases


def _toml(value):
    if isinstance(value, list):
        return "[" + ", ".join(_toml(v) for v in value) + "]"
    if isinstance(value, float) and value.is_integer():
        return f"{value:.1f}"
    return repr(value)


@pytest.mark.parametrize(("section", "where", "key", "bad"), _cases())
def test_out_of_range_option_is_an_option_error_on_its_line(tmp_path, section, where, key, bad):
    hints = typing.get_type_hints(
        dict(_sections())[section]
        if where == section
        else dict(_nested(_sections()[section], section))[where]
    )
    value = bad
    if "int" in str(hints[key]) and "float" not in str(hints[key]):
        value = [int(math.floor(v)) for v in bad] if isinstance(bad, list) else int(bad)
    lines = ['[site]\nname = "Invented Mere"\n' if section != "site" else ""]
    header = f"[[{where}]]" if section == "outlet.component" else f"[{where}]"
    if section == "outlet.component":
        lines.append('[outlet]\nform = "compound"\n')
    if where != section:  # a nested table: its section's required keys first
        lines.append(f"[{section}]\n{REQUIRED.get(section, '')}")
    body = f"{header}\n" + (REQUIRED.get(section, "") if where == section else "")
    lines.append(body)
    text = "".join(lines)
    line = text.count("\n") + 1
    text += f"{key} = {_toml(value)}\n"
    path = tmp_path / "site.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(OptionError) as exc:
        config.load_site(path)
    assert exc.value.line == line, (text, str(exc.value))
    assert exc.value.option == key and key in exc.value.message


def test_every_numeric_option_declares_its_unit_and_range():
    """No number in a site file goes unchecked: each numeric option field is a ``setting``."""
    missing = []
    for section, cls in _sections().items():
        for where, tcls in [(section, cls), *_nested(cls, section)]:
            hints = typing.get_type_hints(tcls)
            for f in dataclasses.fields(tcls):
                tp = hints[f.name]
                plain = tp in (int, float) or set(typing.get_args(tp)) in (
                    {int, type(None)},
                    {float, type(None)},
                )
                if plain and not (f.metadata and "unit" in f.metadata):
                    missing.append(f"{where}.{f.name}")
    assert missing == []


def test_fit_options_check_their_bootstrap_range():
    from lakebalance.outlet import FitOptions

    with pytest.raises(OptionError, match="bootstrap"):
        FitOptions(bootstrap=-1)


@pytest.mark.parametrize(
    ("entry", "words"),
    [
        ("bounds = { b = [2.0, 1.0] }", "lower bound not above"),
        ("bounds = { b = [1.0] }", "[lower, upper]"),
        ("priors = { b = [1.6, 0.0] }", "positive standard error"),
        ("priors = { b = 1.6 }", "must be a list"),  # a type error: ConfigError, same line
    ],
)
def test_outlet_tables_of_parameters_are_checked_on_their_line(tmp_path, entry, words):
    text = f'[site]\nname = "Invented Mere"\n\n[outlet]\ngaugings = "g.csv"\n{entry}\n'
    path = tmp_path / "site.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ConfigError, match=words.replace("[", r"\[")) as exc:
        config.load_site(path)
    assert exc.value.line == 6
    assert isinstance(exc.value, OptionError) == ("must be a list" not in words)


def test_component_priors_are_checked_on_their_line(tmp_path):
    text = (
        '[site]\nname = "Invented Mere"\n[outlet]\nform = "compound"\n'
        '[[outlet.component]]\nname = "spillway"\nform = "weir"\nlength = 12.0\n'
        "priors = { Cw = [1.7, -0.1] }\n"
    )
    path = tmp_path / "site.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(OptionError) as exc:
        config.load_site(path)
    assert exc.value.line == 9 and "priors" in exc.value.message
