"""The least-squares engine against the NIST StRD nonlinear regression reference datasets.

Source: NIST Information Technology Laboratory, Statistical Reference Datasets, Nonlinear
Regression (public domain). The ``.dat`` files in ``data/nist-strd/`` are copied unchanged from the
NIST distribution; every expected number (starting values, certified parameters, certified
standard deviations, residual sum of squares) is parsed from them here, never typed by hand.

Agreement is measured as NIST does, by the log relative error
``LRE = -log10(|estimate - certified| / |certified|)``; the check asks LRE >= 6 (six significant
digits) for every parameter and standard deviation, from both NIST starting points.

The model formulas below are transcribed from the ``Model:`` block of each file.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

from lakebalance.outlet.nls import fit_curve

DATA = Path(__file__).parent / "data" / "nist-strd"
PI = np.pi


@dataclass(frozen=True)
class Problem:
    name: str
    starts: tuple[np.ndarray, np.ndarray]
    certified: np.ndarray
    certified_sd: np.ndarray
    rss: float
    y: np.ndarray
    x: np.ndarray  # (n,) or (n, m) for several predictors


def read_problem(name: str) -> Problem:
    """Parse a NIST StRD ``.dat`` file: starting values, certified values and the data."""
    lines = (DATA / f"{name}.dat").read_text().splitlines()
    rows = []
    for ln in lines:
        m = re.match(r"^\s*b(\d+)\s*=\s*(\S+)\s+(\S+)\s+(\S+)\s+(\S+)\s*$", ln)
        if m:
            rows.append([float(v) for v in m.groups()[1:]])
    table = np.array(rows)
    rss = next(float(ln.split(":")[1]) for ln in lines if ln.startswith("Residual Sum of Squares"))
    data_at = max(i for i, ln in enumerate(lines) if ln.startswith("Data:"))
    values = np.array([[float(v) for v in ln.split()] for ln in lines[data_at + 1 :] if ln.strip()])
    x = values[:, 1] if values.shape[1] == 2 else values[:, 1:]
    return Problem(
        name=name,
        starts=(table[:, 0], table[:, 1]),
        certified=table[:, 2],
        certified_sd=table[:, 3],
        rss=rss,
        y=values[:, 0],
        x=x,
    )


def _rational3(b, x):
    return (b[0] + b[1] * x + b[2] * x**2 + b[3] * x**3) / (
        1 + b[4] * x + b[5] * x**2 + b[6] * x**3
    )


# y = f(b, x), transcribed from each file's "Model:" block (complex-safe numpy expressions)
MODELS = {
    "Misra1a": lambda b, x: b[0] * (1 - np.exp(-b[1] * x)),
    "Misra1b": lambda b, x: b[0] * (1 - (1 + b[1] * x / 2) ** (-2)),
    "Misra1c": lambda b, x: b[0] * (1 - (1 + 2 * b[1] * x) ** (-0.5)),
    "Misra1d": lambda b, x: b[0] * b[1] * x * ((1 + b[1] * x) ** (-1)),
    "Chwirut1": lambda b, x: np.exp(-b[0] * x) / (b[1] + b[2] * x),
    "Chwirut2": lambda b, x: np.exp(-b[0] * x) / (b[1] + b[2] * x),
    "Lanczos1": lambda b, x: (
        b[0] * np.exp(-b[1] * x) + b[2] * np.exp(-b[3] * x) + b[4] * np.exp(-b[5] * x)
    ),
    "Lanczos2": lambda b, x: (
        b[0] * np.exp(-b[1] * x) + b[2] * np.exp(-b[3] * x) + b[4] * np.exp(-b[5] * x)
    ),
    "Lanczos3": lambda b, x: (
        b[0] * np.exp(-b[1] * x) + b[2] * np.exp(-b[3] * x) + b[4] * np.exp(-b[5] * x)
    ),
    "Gauss1": lambda b, x: (
        b[0] * np.exp(-b[1] * x)
        + b[2] * np.exp(-((x - b[3]) ** 2) / b[4] ** 2)
        + b[5] * np.exp(-((x - b[6]) ** 2) / b[7] ** 2)
    ),
    "Gauss2": lambda b, x: (
        b[0] * np.exp(-b[1] * x)
        + b[2] * np.exp(-((x - b[3]) ** 2) / b[4] ** 2)
        + b[5] * np.exp(-((x - b[6]) ** 2) / b[7] ** 2)
    ),
    "Gauss3": lambda b, x: (
        b[0] * np.exp(-b[1] * x)
        + b[2] * np.exp(-((x - b[3]) ** 2) / b[4] ** 2)
        + b[5] * np.exp(-((x - b[6]) ** 2) / b[7] ** 2)
    ),
    "DanWood": lambda b, x: b[0] * x ** b[1],
    "Kirby2": lambda b, x: (b[0] + b[1] * x + b[2] * x**2) / (1 + b[3] * x + b[4] * x**2),
    "Hahn1": _rational3,
    "Nelson": lambda b, x: b[0] - b[1] * x[:, 0] * np.exp(-b[2] * x[:, 1]),  # of log(y)
    "MGH17": lambda b, x: b[0] + b[1] * np.exp(-x * b[3]) + b[2] * np.exp(-x * b[4]),
    "ENSO": lambda b, x: (
        b[0]
        + b[1] * np.cos(2 * PI * x / 12)
        + b[2] * np.sin(2 * PI * x / 12)
        + b[4] * np.cos(2 * PI * x / b[3])
        + b[5] * np.sin(2 * PI * x / b[3])
        + b[7] * np.cos(2 * PI * x / b[6])
        + b[8] * np.sin(2 * PI * x / b[6])
    ),
    "Thurber": _rational3,
    "BoxBOD": lambda b, x: b[0] * (1 - np.exp(-b[1] * x)),
    "Rat42": lambda b, x: b[0] / (1 + np.exp(b[1] - b[2] * x)),
    "MGH09": lambda b, x: b[0] * (x**2 + x * b[1]) / (x**2 + x * b[2] + b[3]),
    "MGH10": lambda b, x: b[0] * np.exp(b[1] / (x + b[2])),
    "Eckerle4": lambda b, x: (b[0] / b[1]) * np.exp(-0.5 * ((x - b[2]) / b[1]) ** 2),
    "Rat43": lambda b, x: b[0] / ((1 + np.exp(b[1] - b[2] * x)) ** (1 / b[3])),
    "Bennett5": lambda b, x: b[0] * (b[1] + x) ** (-1 / b[2]),
    "Roszman1": lambda b, x: b[0] - b[1] * x - np.arctan(b[2] / (x - b[3])) / PI,
}

#: the problems the issue requires (DanWood also goes through the rating API below)
REQUIRED = ["DanWood", "Misra1a", "Chwirut2", "BoxBOD", "Rat43", "Eckerle4", "Thurber"]
#: every other StRD problem this engine also passes (see benchmarks/bench_rating.py --nist)
ALSO_PASSING = [
    name
    for name in (
        "Misra1b Misra1c Misra1d Chwirut1 Lanczos2 Lanczos3 Gauss1 Gauss2 Gauss3 Kirby2 Hahn1 "
        "Nelson MGH17 ENSO Rat42 MGH09 MGH10 Bennett5 Roszman1"
    ).split()
]
#: Lanczos1: the certified residual sum of squares (1.4e-25) lies at the round-off floor of
#: double precision, so its standard deviations (which scale with it) agree to ~3 digits only;
#: the parameters themselves agree to >= 6 digits (checked below).
PARAMETERS_ONLY = ["Lanczos1"]


def lre(estimate: np.ndarray, certified: np.ndarray) -> np.ndarray:
    """NIST log relative error (number of agreeing significant digits, capped at 11)."""
    with np.errstate(divide="ignore"):
        rel = np.abs(estimate - certified) / np.abs(certified)
        return np.minimum(-np.log10(rel), 11.0)


def solve(problem: Problem, start: int):
    """Fit one problem from NIST start 1 or 2 with the generic engine."""
    model = MODELS[problem.name]
    y = np.log(problem.y) if problem.name == "Nelson" else problem.y
    with np.errstate(all="ignore"):  # trial steps far from the optimum may overflow
        return fit_curve(model, problem.x, y, problem.starts[start - 1], jacobian="complex")


@pytest.mark.parametrize("start", [1, 2])
@pytest.mark.parametrize("name", REQUIRED[1:] + ALSO_PASSING)
def test_nist_strd_certified_values_engine(name: str, start: int) -> None:
    """NIST StRD certified parameters and standard deviations, >= 6 significant digits."""
    problem = read_problem(name)
    fit = solve(problem, start)
    assert lre(fit.params, problem.certified).min() >= 6, (fit.params, problem.certified)
    assert lre(fit.stderr, problem.certified_sd).min() >= 6, (fit.stderr, problem.certified_sd)
    assert lre(np.array([fit.rss]), np.array([problem.rss]))[0] >= 6


@pytest.mark.parametrize("start", [1, 2])
@pytest.mark.parametrize("name", PARAMETERS_ONLY)
def test_nist_strd_certified_parameters_only(name: str, start: int) -> None:
    """NIST StRD certified parameters (>= 6 digits) where the certified RSS is below round-off."""
    problem = read_problem(name)
    fit = solve(problem, start)
    assert lre(fit.params, problem.certified).min() >= 6


@pytest.mark.parametrize("start", [1, 2])
def test_nist_strd_danwood_through_rating_api(start: int) -> None:
    """NIST StRD DanWood (y = b1 x^b2) as a power-law rating with e fixed at 0, linear residuals.

    The NIST predictor (temperature) plays the stage and the response the discharge; b1 is C and
    b2 is b of Q = C (h - e)^b.
    """
    from lakebalance.outlet import FitOptions, fit_rating_curve, power_law

    problem = read_problem("DanWood")
    b1, b2 = problem.starts[start - 1]
    fit = fit_rating_curve(
        power_law(),
        problem.x,
        problem.y,
        options=FitOptions(
            residuals="linear", fixed={"e": 0.0}, initial={"C": float(b1), "b": float(b2)}
        ),
    )
    est = np.array([fit.params["C"], fit.params["b"]])
    sd = np.array([fit.stderr["C"], fit.stderr["b"]])
    assert lre(est, problem.certified).min() >= 6
    assert lre(sd, problem.certified_sd).min() >= 6
    assert fit.stderr["e"] == 0.0


def test_nist_parser_reads_every_file() -> None:
    """Every StRD file parses: as many starting values as certified values, data non-empty."""
    for name in MODELS:
        p = read_problem(name)
        assert p.starts[0].size == p.certified.size == p.certified_sd.size > 0
        assert p.y.size == len(p.x) > p.certified.size
