"""What the gaugings can tell about each rating parameter: profile-likelihood intervals, and how
many gaugings support each control.

A parameter that ends on a bound (a spillway coefficient pushed to zero, a datum held at the
highest zero-flow gauging) or that the gaugings barely constrain has no useful Wald standard
error: the curvature at the optimum is zero, undefined or meaningless. Its interval is found
instead by profiling the objective: the parameter is held at trial values and the others refitted,
and the interval holds the values whose profile objective stays within the usual threshold.

Notes
-----
With :math:`S(\\theta)` the (penalised) sum of squares, :math:`\\tilde S(v) = \\min_{\\theta:\\,
\\theta_j = v} S(\\theta)` the profile and :math:`s^2` the residual variance of the fit, the
profile t function is :math:`\\tau(v) = \\operatorname{sign}(v - \\hat\\theta_j)\\sqrt{\\tilde S(v) -
S(\\hat\\theta)}/s` and the :math:`1-\\alpha` interval is :math:`\\{v : |\\tau(v)| \\le
t_{n-p}(1-\\alpha/2)\\}` (Bates & Watts, 1988, §6.1.2). It is cut at the parameter's bounds; an
end that no trial value reaches is open (infinite), which says the gaugings do not bound the
parameter on that side.

Rating practice asks for enough gaugings over each control's range: ISO 18320:2020 (which
replaced ISO 1100-2) and WMO-No. 1044 (2010, Vol. I) speak of at least about 12 to 15 gaugings
for a stable control, spread over its range (counts from memory). A control with fewer than
three gaugings per free parameter above its threshold is called weakly identified here (common
practice, no source).

References
----------
Bates, D. M. and Watts, D. G. (1988). Nonlinear Regression Analysis and Its Applications. Wiley.
ISO 18320 (2020). Hydrometry - Measurement of liquid flow in open channels - Determination of
the stage-discharge relation.
WMO (2010). Manual on Stream Gauging, Vol. II: Computation of Discharge. WMO-No. 1044.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..errors import FitError

__all__ = [
    "PRACTICE_MIN_GAUGINGS",
    "WEAK_PER_PARAMETER",
    "ControlSupport",
    "control_support",
    "profile_interval",
]

Array = np.ndarray

#: Gaugings per control that rating practice expects at the least (ISO 18320:2020; WMO-No. 1044;
#: from memory: "about 12 to 15").
PRACTICE_MIN_GAUGINGS = 12
#: Below this many gaugings per free parameter above its threshold a control is weakly identified
#: (common practice, no source).
WEAK_PER_PARAMETER = 3


@dataclass(frozen=True)
class ControlSupport:
    """How many gaugings support one control of the rating.

    Attributes
    ----------
    control : str
        The control's name (``"outlet"`` for a single law, else the component or segment).
    threshold_m : float
        The stage above which the control acts (its fitted datum or crest, or the segment's
        lower break), m.
    gaugings : int
        Gaugings in the residuals above the threshold.
    free : tuple of str
        The control's free parameters.
    prior : tuple of str
        Those of them with a prior.
    """

    control: str
    threshold_m: float
    gaugings: int
    free: tuple[str, ...]
    prior: tuple[str, ...]

    @property
    def weak(self) -> bool:
        """Fewer than :data:`WEAK_PER_PARAMETER` gaugings per free parameter above the
        threshold."""
        return bool(self.free) and self.gaugings < WEAK_PER_PARAMETER * len(self.free)

    @property
    def below_practice(self) -> bool:
        """Fewer gaugings than rating practice expects for a control."""
        return bool(self.free) and self.gaugings < PRACTICE_MIN_GAUGINGS

    def messages(self) -> list[str]:
        """Plain-words findings (empty when the control is well supported)."""
        out = []
        where = f"control '{self.control}' (above {self.threshold_m:.3f} m)"
        if self.weak:
            if self.prior:
                rest = f"flows above {self.threshold_m:.3f} m rest on the prior of " + ", ".join(
                    self.prior
                )
            else:
                rest = (
                    f"flows above {self.threshold_m:.3f} m rest on the form of the law, not on "
                    "the gaugings; enter the handbook or drawing value of its coefficient as a "
                    "prior (value and standard error)"
                )
            out.append(
                f"{where} is weakly identified: {self.gaugings} gauging(s) above its threshold "
                f"for {len(self.free)} free parameter(s); {rest}"
            )
        elif self.below_practice:
            out.append(
                f"{where} has {self.gaugings} gaugings; rating practice expects at least about "
                f"{PRACTICE_MIN_GAUGINGS} spread over its range (ISO 18320:2020, WMO-No. 1044; "
                "count from memory)"
            )
        return out


def control_support(
    law, params: dict[str, float], free: dict[str, bool], priors: Sequence[str], stages_m: Array
) -> tuple[ControlSupport, ...]:
    """The gaugings above each control's threshold.

    Parameters
    ----------
    law : Law
        The rating law (single, compound or segmented).
    params : dict
        Fitted parameters by name (SI).
    free : dict
        Parameter name -> whether it was estimated.
    priors : sequence of str
        Parameters with a prior.
    stages_m : ndarray
        Stages of the gaugings in the residuals, m.
    """
    h = np.asarray(stages_m, dtype=float)
    controls: list[tuple[str, float, list[str]]] = []
    if hasattr(law, "components"):
        for name, sub in law.components:
            names = [f"{name}.{p}" for p in sub.param_names]
            controls.append((name, params[f"{name}.{sub.datum_name}"], names))
    elif hasattr(law, "segments"):
        own = set(law.param_names)
        for i, (name, sub) in enumerate(law.segments):
            names = [f"{name}.{p}" for p in sub.param_names if f"{name}.{p}" in own]
            threshold = params[f"{name}.{sub.datum_name}"] if i == 0 else law.breaks[i - 1]
            controls.append((name, threshold, names))
    else:
        datum = law.datum_names()[0]
        controls.append(("outlet", params[datum], list(law.param_names)))
    out = []
    for name, threshold, names in controls:
        frees = tuple(n for n in names if free.get(n, False))
        out.append(
            ControlSupport(
                control=name,
                threshold_m=float(threshold),
                gaugings=int(np.sum(h > threshold)),
                free=frees,
                prior=tuple(n for n in frees if n in priors),
            )
        )
    return tuple(out)


def profile_interval(
    objective: Callable[[int, float, Array], tuple[float, Array]],
    theta: Array,
    j: int,
    *,
    lower: float,
    upper: float,
    s_min: float,
    threshold: float,
    scale: float,
    max_doublings: int = 40,
    tol: float = 1e-4,
) -> tuple[float, float]:
    """Profile-likelihood interval of parameter ``j``: the values whose profile objective stays
    within ``threshold`` of the minimum.

    Parameters
    ----------
    objective : callable
        ``objective(j, v, start) -> (S, theta_v)``: the smallest objective with parameter ``j``
        held at ``v`` (the others refitted from ``start``), and the refitted vector.
    theta : ndarray
        The estimate (free parameters).
    j : int
        Which parameter.
    lower, upper : float
        Its bounds (may be infinite).
    s_min : float
        The objective at the estimate.
    threshold : float
        Allowed rise of the objective, :math:`s^2 t^2_{n-p}(1-\\alpha/2)`.
    scale : float
        First step away from the estimate (positive, units of the parameter).
    max_doublings : int
        Steps of doubling length before an end is called open.
    tol : float
        Relative tolerance of each end.

    Returns
    -------
    (lower, upper) : floats
        The interval; an end may be a bound or ``±inf`` (not reached).
    """
    ends = []
    for direction in (-1.0, 1.0):
        bound = lower if direction < 0 else upper
        if (bound - theta[j]) * direction <= 0:
            ends.append(float(theta[j]))  # at the bound on this side
            continue
        inside_v, inside_t = float(theta[j]), theta
        step = scale
        outside_v = None
        for _ in range(max_doublings):
            v = theta[j] + direction * step
            if (v - bound) * direction >= 0:
                v = bound
            try:
                s, t_v = objective(j, v, inside_t)
            except FitError:
                s, t_v = np.inf, inside_t
            if s - s_min > threshold or not np.isfinite(s):
                outside_v = v
                break
            inside_v, inside_t = v, t_v
            if v == bound:
                break
            step *= 2.0
        if outside_v is None:
            ends.append(float(inside_v) if inside_v == bound else direction * np.inf)
            continue
        a, b = inside_v, outside_v  # a inside, b outside: bisect
        for _ in range(60):
            if abs(b - a) <= tol * max(abs(a), abs(b), scale):
                break
            m = 0.5 * (a + b)
            try:
                s, t_m = objective(j, m, inside_t)
            except FitError:
                s, t_m = np.inf, inside_t
            if np.isfinite(s) and s - s_min <= threshold:
                a, inside_t = m, t_m
            else:
                b = m
        ends.append(float(0.5 * (a + b)))
    return ends[0], ends[1]
