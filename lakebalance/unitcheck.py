"""Is a series in the unit it was declared in? The likely intended unit when it is not.

A series whose typical daily values lie wholly outside its role's typical range
(:attr:`lakebalance.vocabulary.Role.typical`) was probably read in the wrong unit: ``ml/d``
typed for ``ML/d`` (units are case-sensitive, and ``ml`` is the millilitre) makes a lake inflow
a billion times too small; rain in m declared as mm a thousand times too small. The raw numbers
are read again in each usual unit of the role's kind; a unit that brings them inside the range is
named, one differing from the declared unit only in letter case first.

A stage has no range of its own (any datum), but it must lie in the storage relation: a stage
in feet declared as metres lies 3.28 times too high (:func:`stage_unit_against_storage`).

Notes
-----
"Wholly outside": the 5th percentile of the typical values above the range, or the 95th below it
(common practice, no source). The ranges are generous on purpose; they catch a factor of ten or
more, not a wrong gauge.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["CANDIDATES", "intended_unit", "stage_unit_against_storage"]

#: Usual units of each kind, tried in turn when a series looks mis-declared.
CANDIDATES: dict[str, tuple[str, ...]] = {
    "flow": ("m**3/s", "L/s", "ML/d", "m**3/d", "m**3/h", "ft**3/s"),
    "depth": ("mm", "cm", "m", "in"),
    "length": ("m", "ft", "cm", "mm", "in"),
    "speed": ("m/s", "km/h", "knot", "mph"),
    "temperature": ("degC", "degF", "K"),
    "radiation": ("MJ/m**2/d", "W/m**2", "kWh/m**2/d"),
}


def _affine(unit: str, kind: str) -> tuple[float, float] | None:
    """``(a, b)`` with ``SI = a * raw + b`` for ``unit``, or None when it does not parse."""
    from .errors import UnitError
    from .units import to_si

    try:
        f0, f1 = to_si(np.array([0.0, 1.0]), unit, kind, "unit check")
    except UnitError:
        return None
    return float(f1 - f0), float(f0)


def _wholly_outside(x: np.ndarray, lo: float, hi: float) -> bool:
    if x.size < 3:
        return False
    p05, p95 = np.percentile(x, [5, 95])
    return bool(p95 < lo or p05 > hi)


def _centre(lo: float, hi: float, kind: str) -> float:
    if kind == "temperature" or lo <= 0:
        return 0.5 * (lo + hi)
    return math.sqrt(lo * hi)


def intended_unit(
    role: str, daily_si: np.ndarray, declared: str, *, label: str | None = None
) -> str | None:
    """A warning when the series looks read in the wrong unit, naming the likely intended one.

    Parameters
    ----------
    role : str
        The series role (a key of :data:`lakebalance.vocabulary.ROLES`).
    daily_si : ndarray
        Daily values in the internal unit of the role's kind.
    declared : str
        The unit the series was declared (and read) in.
    label : str, optional
        Words for the values in the message (default: the role's label).

    Returns
    -------
    str or None
        Plain words, or None when the values look plausible (or the role has no range).
    """
    from .units import INTERNAL_UNITS
    from .vocabulary import ROLES

    r = ROLES.get(role)
    if r is None or not all(math.isfinite(b) for b in r.typical):
        return None
    lo, hi = r.typical
    x = np.asarray(daily_si, dtype=float)
    x = x[np.isfinite(x)]
    if r.non_negative:
        x = x[x > 0]
    if not _wholly_outside(x, lo, hi):
        return None
    own = _affine(declared, r.kind)
    if own is None or own[0] == 0:
        return None
    raw = (x - own[1]) / own[0]
    fits = []
    for cand in CANDIDATES.get(r.kind, ()):
        conv = _affine(cand, r.kind)
        if conv is None or np.isclose(conv[0], own[0]) and np.isclose(conv[1], own[1]):
            continue
        y = conv[0] * raw + conv[1]
        if not _wholly_outside(y, lo, hi) and lo <= np.median(y) <= hi:
            off = abs(math.log(abs(np.median(y) / _centre(lo, hi, r.kind)) + 1e-300))
            if r.kind == "temperature":
                off = abs(np.median(y) - _centre(lo, hi, r.kind))
            fits.append((cand.lower() != declared.lower(), off, cand))
    unit = INTERNAL_UNITS[r.kind]
    median = float(np.median(x))
    text = (
        f"{label or r.label} read in {declared!r} has typical daily values of {median:.3g} {unit}, "
        f"wholly outside the plausible {lo:g} to {hi:g} {unit}"
    )
    if not fits:
        return text + "; is the declared unit right?"
    same_letters, _, best = min(fits)
    hint = f" (units are case-sensitive: {declared!r} is not {best!r})" if not same_letters else ""
    return text + f"; read in {best!r} they would be plausible: {best!r} intended?{hint}"


def stage_unit_against_storage(
    stage_m: np.ndarray, declared: str, low_m: float, high_m: float, *, what: str = "stage"
) -> str | None:
    """A warning when a stage series lies wholly outside the storage relation but would lie
    inside it read in another length unit (e.g. feet declared as metres).

    Parameters
    ----------
    stage_m : ndarray
        Daily stages, m (as read in ``declared``).
    declared : str
        The unit the stage was declared in.
    low_m, high_m : float
        Stage range of the storage relation, m.
    what : str
        Words for the stages in the message (``"stage"``, ``"gauging stages"``).
    """
    x = np.asarray(stage_m, dtype=float)
    x = x[np.isfinite(x)]
    span = max(high_m - low_m, 1e-9)
    lo, hi = low_m - 0.5 * span, high_m + 0.5 * span  # generous: a relation may not reach
    if not _wholly_outside(x, lo, hi):
        return None
    own = _affine(declared, "length")
    if own is None or own[0] == 0:
        return None
    raw = (x - own[1]) / own[0]
    text = (
        f"{what} read in {declared!r} ({np.percentile(x, 5):.4g} to {np.percentile(x, 95):.4g} m) "
        f"lies wholly outside the storage relation ({low_m:.4g} to {high_m:.4g} m)"
    )
    for cand in CANDIDATES["length"]:
        conv = _affine(cand, "length")
        if conv is None or np.isclose(conv[0], own[0]):
            continue
        y = conv[0] * raw + conv[1]
        if np.mean((y >= low_m) & (y <= high_m)) >= 0.9:
            return text + f"; read in {cand!r} it would lie inside: {cand!r} intended?"
    return text + "; another unit or another datum than the relation's?"
