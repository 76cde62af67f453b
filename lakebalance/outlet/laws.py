"""Outlet control laws: stage (m, gauge datum) to discharge (m³/s), with exact derivatives.

Every law evaluates on parameter values that broadcast against the stage array, so that one call
serves a single curve (scalar parameters), a fit (the Jacobian) and an ensemble (one parameter
row per member, :meth:`Rating.discharge_with`).

=========  ======================================  =====================================
form       discharge (h > datum, else 0)           parameters (SI)
=========  ======================================  =====================================
power      Q = C (h - e)^b                         C (m^(3-b)/s), e (m), b (-)
weir       Q = Cw L (h - crest)^1.5                Cw (m^0.5/s), crest (m); L fixed (m)
vnotch     Q = Cv tan(θ/2) (h - vertex)^2.5        Cv (m^0.5/s), vertex (m); θ fixed
orifice    Q = K (h - e)^0.5                       K (m^2.5/s), e (m), may lie below 0
compound   Q = Σ_j Q_j(h), each above its datum    ``<component>.<param>``
segmented  Q = Q_i(h) on (B_(i-1), B_i]            first segment free; later ones have
                                                   their coefficient set by continuity
=========  ======================================  =====================================

Each law knows what a fit needs of it (:class:`Law`): its parameter names and units, the
discharge and its exact Jacobian, default bounds from what the gaugings say about its datums
(:class:`GaugedStages`), automatic starting values from the gaugings, and the quantities its
parameters imply. :data:`LAWS` is the one table from a form's name to the law it builds, read by
:func:`law_from_options`.

Notes
-----
The power law is the general control form of rating practice (ISO 1100-2, 2010, eq. 1, with
``e`` the stage of zero flow). The weir, V-notch and orifice forms are the classic hydraulic
formulae: the broad-crested weir has the theoretical coefficient
:math:`C_w = (2/3)^{1.5}\\sqrt{g} = 1.705\\ \\mathrm{m^{0.5}/s}` (Chow, 1959, §15-2; Henderson,
1966, eq. 6.4); the sharp-crested triangular notch :math:`Q = (8/15) C_d \\sqrt{2g}\\tan(θ/2)
H^{2.5}` (Bos, 1989, eq. 5.32), i.e. :math:`C_v = (8/15) C_d\\sqrt{2g}`; the orifice
:math:`Q = C_d A \\sqrt{2 g H}` (Henderson, 1966, eq. 1.14), i.e. :math:`K = C_d A \\sqrt{2g}`,
with :math:`H` the head on the orifice centre, so ``e`` may lie below the gauge zero and flow
continues at zero gauge stage until the head is gone.

References
----------
Bos, M. G. (ed.) (1989). Discharge Measurement Structures, 3rd ed. ILRI Publication 20.
Chow, V. T. (1959). Open-Channel Hydraulics. McGraw-Hill.
Henderson, F. M. (1966). Open Channel Flow. Macmillan.
ISO 1100-2 (2010). Hydrometry - Measurement of liquid flow in open channels - Part 2:
Determination of the stage-discharge relationship.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal, Protocol

import numpy as np

from ..errors import ConfigError
from .starts import (
    controls_start,
    parallel_datum_candidates,
    profile_start,
    segment_datum_candidates,
)

__all__ = [
    "Form",
    "Law",
    "GaugedStages",
    "LawEntry",
    "LAWS",
    "PowerFamilyLaw",
    "CompoundLaw",
    "SegmentedLaw",
    "Rating",
    "power_law",
    "weir_law",
    "vnotch_law",
    "orifice_law",
    "compound_law",
    "segmented_law",
    "law_from_options",
    "discharge_with",
    "GRAVITY_M_S2",
    "BROAD_CRESTED_WEIR_CW",
]

Form = Literal["power", "weir", "vnotch", "orifice", "compound", "segmented"]
Array = np.ndarray
Params = Sequence[Array | float]

GRAVITY_M_S2 = 9.80665  # m/s², standard gravity (CGPM 1901; NIST SP 811 Appendix B)
#: theoretical broad-crested weir coefficient (2/3)^1.5 sqrt(g), m^0.5/s (Henderson 1966, eq. 6.4)
BROAD_CRESTED_WEIR_CW = (2.0 / 3.0) ** 1.5 * math.sqrt(GRAVITY_M_S2)


class Law(Protocol):
    """What every control law offers (parameter values broadcast against the stage)."""

    form: str
    param_names: tuple[str, ...]

    def discharge(self, p: Params, stage_m: Array) -> Array:
        """Discharge, m³/s."""
        ...

    def gradient(self, p: Params, stage_m: Array) -> list[Array]:
        """∂Q/∂p_j for each parameter, same shape as the discharge."""
        ...

    def derivative(self, p: Params, stage_m: Array) -> Array:
        """∂Q/∂h, m²/s."""
        ...

    def datum_names(self) -> tuple[str, ...]:
        """Parameters that are stages (m): the datum below which a control gives no flow."""
        ...

    @property
    def param_units(self) -> dict[str, str]:
        """Unit of each parameter (``"-"`` when dimensionless)."""
        ...

    def default_bounds(self, stages: GaugedStages) -> tuple[Array, Array]:
        """Lower and upper bound of each parameter (SI), before the user's bounds."""
        ...

    def starting_values(
        self,
        h: Array,
        q: Array,
        w: Array,
        lower: Array,
        upper: Array,
        given: Mapping[str, float],
    ) -> list[Array]:
        """Candidate starting vectors (``param_names`` order) from the gaugings with flow:
        stages ``h`` (m), discharges ``q`` (m³/s), weights ``w`` (-), within the bounds;
        ``given`` holds initial and fixed values by name (the fit sets those afterwards)."""
        ...

    def derived(self, p: Params) -> dict[str, float]:
        """Quantities implied by the parameters (SI), e.g. coefficients set by continuity."""
        ...


@dataclass(frozen=True)
class GaugedStages:
    """What the gaugings say about where the datums of the controls can lie.

    Parameters
    ----------
    lowest_flow_m : float
        Lowest stage of a gauging with flow, m: the first control's datum lies below it.
    highest_zero_flow_m : float or None
        Highest stage of a zero-flow gauging, m: a control that is dry there has its datum at or
        above it (common practice, no source).
    """

    lowest_flow_m: float
    highest_zero_flow_m: float | None = None


@dataclass(frozen=True)
class PowerFamilyLaw:
    """``Q = coef * factor * (h - datum)^b`` for ``h > datum``, else 0.

    ``exponent`` None makes ``b`` a parameter (the power law); a number fixes it (weir 1.5,
    V-notch 2.5, orifice 0.5). ``factor`` is a fixed geometric factor (crest length, tan(θ/2)).
    Build with :func:`power_law`, :func:`weir_law`, :func:`vnotch_law` or :func:`orifice_law`.
    """

    form: str
    coef_name: str
    datum_name: str
    exponent: float | None = None
    factor: float = 1.0
    geometry: Mapping[str, float] = field(default_factory=dict)
    coef_unit: str | None = None  # default: m^(3-b)/s, or m^(3-exponent)/s with a fixed one

    @property
    def param_names(self) -> tuple[str, ...]:
        names = (self.coef_name, self.datum_name)
        return names + ("b",) if self.exponent is None else names

    def datum_names(self) -> tuple[str, ...]:
        return (self.datum_name,)

    @property
    def param_units(self) -> dict[str, str]:
        """The coefficient's unit makes Q m³/s; the datum is a stage (m); b is dimensionless."""
        if self.coef_unit is not None:
            coef = self.coef_unit
        elif self.exponent is None:
            coef = "m^(3-b)/s"
        else:
            coef = f"m^{3.0 - self.exponent:g}/s"
        units = {self.coef_name: coef, self.datum_name: "m"}
        if self.exponent is None:
            units["b"] = "-"
        return units

    def control_bounds(
        self,
        stages: GaugedStages,
        *,
        first: bool = True,
        below_m: float | None = None,
        floor_at_zero_flow: bool = True,
    ) -> dict[str, tuple[float, float]]:
        """Default bounds of this control's parameters as one control among others.

        The coefficient is positive and ``b`` lies in [0.001, 50]; the datum lies at or above
        the highest zero-flow gauging (``floor_at_zero_flow``), below the lowest gauging with
        flow when the control is the ``first`` (lowest) one, and below ``below_m`` (a segment's
        lower break, m) when given (common practice, no source).
        """
        out = {self.coef_name: (0.0, math.inf)}
        if self.exponent is None:
            out["b"] = (1e-3, 50.0)
        lo, hi = -math.inf, math.inf
        if stages.highest_zero_flow_m is not None and floor_at_zero_flow:
            lo = stages.highest_zero_flow_m
        if first:
            hmin = stages.lowest_flow_m
            hi = hmin - 1e-9 * max(1.0, abs(hmin))
        if below_m is not None:
            hi = below_m - 1e-6 * max(1.0, abs(below_m))
        out[self.datum_name] = (lo, hi)
        return out

    def default_bounds(self, stages: GaugedStages) -> tuple[Array, Array]:
        """Bounds of a single control (see :meth:`control_bounds`), in ``param_names`` order."""
        return _arrays(self.control_bounds(stages), self.param_names)

    def starting_values(
        self,
        h: Array,
        q: Array,
        w: Array,
        lower: Array,
        upper: Array,
        given: Mapping[str, float],
    ) -> list[Array]:
        """One start: the datum profile of :func:`~lakebalance.outlet.starts.profile_start`."""
        i = self.param_names.index(self.datum_name)
        s = profile_start(self, h, q, w, lower[i], upper[i], given)
        return [np.array([s[n] for n in self.param_names])]

    def derived(self, p: Params) -> dict[str, float]:
        return {}

    def _parts(self, p: Params, stage_m: Array) -> tuple[Array, Array, Array, Array]:
        coef = np.asarray(p[0], dtype=float)
        b = np.asarray(p[2] if self.exponent is None else self.exponent, dtype=float)
        depth = np.asarray(stage_m, dtype=float) - np.asarray(p[1], dtype=float)
        wet = depth > 0
        d = np.where(wet, depth, 1.0)
        return coef * self.factor, b, d, wet

    def discharge(self, p: Params, stage_m: Array) -> Array:
        c, b, d, wet = self._parts(p, stage_m)
        with np.errstate(over="ignore", invalid="ignore"):
            return np.where(wet, c * d**b, 0.0)

    def gradient(self, p: Params, stage_m: Array) -> list[Array]:
        c, b, d, wet = self._parts(p, stage_m)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            db = d**b
            out = [
                np.where(wet, self.factor * db, 0.0),
                np.where(wet, -c * b * db / d, 0.0),
            ]
            if self.exponent is None:
                out.append(np.where(wet, c * db * np.log(d), 0.0))
        return out

    def derivative(self, p: Params, stage_m: Array) -> Array:
        c, b, d, wet = self._parts(p, stage_m)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            return np.where(wet, c * b * d ** (b - 1.0), 0.0)


def power_law() -> PowerFamilyLaw:
    """``Q = C (h - e)^b``: C (m^(3-b)/s), e stage of zero flow (m), b exponent (-)."""
    return PowerFamilyLaw("power", "C", "e")


def weir_law(length_m: float) -> PowerFamilyLaw:
    """Rectangular weir ``Q = Cw L (h - crest)^1.5``; ``length_m`` the crest length L (m)."""
    if not (length_m > 0):
        raise ConfigError(f"weir crest length must be positive, got {length_m!r} m")
    return PowerFamilyLaw(
        "weir", "Cw", "crest", 1.5, float(length_m), {"length": length_m}, coef_unit="m^0.5/s"
    )


def vnotch_law(angle_deg: float) -> PowerFamilyLaw:
    """Triangular notch ``Q = Cv tan(θ/2) (h - vertex)^2.5``; ``angle_deg`` θ (degrees)."""
    if not (0 < angle_deg < 180):
        raise ConfigError(f"V-notch angle must lie between 0 and 180 degrees, got {angle_deg!r}")
    return PowerFamilyLaw(
        "vnotch", "Cv", "vertex", 2.5, math.tan(math.radians(angle_deg) / 2), {"angle": angle_deg}
    )


def orifice_law() -> PowerFamilyLaw:
    """Orifice or short pipe ``Q = K (h - e)^0.5``; e the orifice centre stage (m), may be < 0."""
    return PowerFamilyLaw("orifice", "K", "e", 0.5)


def _arrays(bounds: Mapping[str, tuple[float, float]], names: Sequence[str]):
    """``(lower, upper)`` arrays in ``names`` order from ``{name: (lower, upper)}``."""
    lo = np.array([bounds[n][0] for n in names], dtype=float)
    hi = np.array([bounds[n][1] for n in names], dtype=float)
    return lo, hi


def _split(law_sizes: Sequence[int], p: Params) -> list[Params]:
    out, i = [], 0
    for k in law_sizes:
        out.append(p[i : i + k])
        i += k
    return out


@dataclass(frozen=True)
class CompoundLaw:
    """Controls in parallel (e.g. a sill and an emergency spillway): ``Q = Σ Q_j(h)``.

    Each component flows only above its own datum. Parameters are ``<component>.<param>``.
    """

    components: tuple[tuple[str, PowerFamilyLaw], ...]
    form: str = "compound"

    @property
    def param_names(self) -> tuple[str, ...]:
        return tuple(f"{name}.{p}" for name, law in self.components for p in law.param_names)

    def datum_names(self) -> tuple[str, ...]:
        return tuple(f"{name}.{law.datum_name}" for name, law in self.components)

    @property
    def param_units(self) -> dict[str, str]:
        return {f"{n}.{p}": u for n, law in self.components for p, u in law.param_units.items()}

    def default_bounds(self, stages: GaugedStages) -> tuple[Array, Array]:
        """Each control as in :meth:`PowerFamilyLaw.control_bounds`; only the first (lowest)
        one must have its datum below the lowest gauging with flow."""
        bounds = {
            f"{name}.{p}": b
            for j, (name, law) in enumerate(self.components)
            for p, b in law.control_bounds(stages, first=j == 0).items()
        }
        return _arrays(bounds, self.param_names)

    def starting_values(
        self,
        h: Array,
        q: Array,
        w: Array,
        lower: Array,
        upper: Array,
        given: Mapping[str, float],
    ) -> list[Array]:
        """Later controls' datums tried at quantiles of the gauged stages; the first control
        fitted to the gaugings below the lowest of them (:func:`~.starts.controls_start`)."""
        return controls_start(
            self.param_names,
            self.components,
            (h, q, w),
            (lower, upper),
            given,
            datum_candidates=lambda j, hf, lo, hi: parallel_datum_candidates(hf, lo, hi),
            first_below=min,
        )

    def derived(self, p: Params) -> dict[str, float]:
        return {}

    def _sizes(self) -> list[int]:
        return [len(law.param_names) for _, law in self.components]

    def discharge(self, p: Params, stage_m: Array) -> Array:
        parts = _split(self._sizes(), p)
        return sum(law.discharge(q, stage_m) for (_, law), q in zip(self.components, parts))

    def component_discharge(self, p: Params, stage_m: Array) -> dict[str, Array]:
        """Discharge of each component, m³/s."""
        parts = _split(self._sizes(), p)
        return {n: law.discharge(q, stage_m) for (n, law), q in zip(self.components, parts)}

    def gradient(self, p: Params, stage_m: Array) -> list[Array]:
        parts = _split(self._sizes(), p)
        out: list[Array] = []
        for (_, law), q in zip(self.components, parts):
            out.extend(law.gradient(q, stage_m))
        return out

    def derivative(self, p: Params, stage_m: Array) -> Array:
        parts = _split(self._sizes(), p)
        return sum(law.derivative(q, stage_m) for (_, law), q in zip(self.components, parts))


@dataclass(frozen=True)
class SegmentedLaw:
    """Different laws over stage ranges, continuous at the breakpoints.

    Segment 0 applies up to ``breaks[0]``, segment i on ``(breaks[i-1], breaks[i]]``, the last
    one above the last break. The first segment has all its parameters; every later segment has
    its coefficient set so that the curve is continuous at its lower break.

    Notes
    -----
    With :math:`g_i(h) = Q_i(h)/c_i` the law of segment i with unit coefficient and
    :math:`A_i = Q_{i-1}(B_i)` the discharge of the previous segment at the break,
    :math:`Q_i(h) = A_i\\, g_i(h) / g_i(B_i)`, so :math:`c_i = A_i / g_i(B_i)` (common practice,
    no source). Derivatives follow by the chain rule.
    """

    segments: tuple[tuple[str, PowerFamilyLaw], ...]
    breaks: tuple[float, ...]
    form: str = "segmented"

    def __post_init__(self) -> None:
        if len(self.breaks) != len(self.segments) - 1:
            raise ConfigError("a segmented rating needs one break fewer than segments")
        if any(b2 <= b1 for b1, b2 in zip(self.breaks, self.breaks[1:])):
            raise ConfigError("segment upper stages must increase")

    def _sizes(self) -> list[int]:
        return [len(law.param_names) - (i > 0) for i, (_, law) in enumerate(self.segments)]

    @property
    def param_names(self) -> tuple[str, ...]:
        out: list[str] = []
        for i, (name, law) in enumerate(self.segments):
            names = law.param_names[1:] if i else law.param_names
            out.extend(f"{name}.{p}" for p in names)
        return tuple(out)

    def datum_names(self) -> tuple[str, ...]:
        return tuple(f"{name}.{law.datum_name}" for name, law in self.segments)

    @property
    def param_units(self) -> dict[str, str]:
        names = set(self.param_names)
        return {
            f"{n}.{p}": u
            for n, law in self.segments
            for p, u in law.param_units.items()
            if f"{n}.{p}" in names
        }

    def default_bounds(self, stages: GaugedStages) -> tuple[Array, Array]:
        """The first segment as a first control; every later one has its datum below its lower
        break and not bounded by zero-flow gaugings (its coefficient is set by continuity)."""
        bounds: dict[str, tuple[float, float]] = {}
        for j, (name, law) in enumerate(self.segments):
            one = law.control_bounds(
                stages,
                first=j == 0,
                below_m=self.breaks[j - 1] if j else None,
                floor_at_zero_flow=j == 0,
            )
            bounds.update({f"{name}.{p}": b for p, b in one.items()})
        return _arrays(bounds, self.param_names)

    def starting_values(
        self,
        h: Array,
        q: Array,
        w: Array,
        lower: Array,
        upper: Array,
        given: Mapping[str, float],
    ) -> list[Array]:
        """Later segments' datums tried below their breaks; the first segment fitted to the
        gaugings below the first break (:func:`~.starts.controls_start`)."""
        return controls_start(
            self.param_names,
            self.segments,
            (h, q, w),
            (lower, upper),
            given,
            datum_candidates=lambda j, hf, lo, hi: segment_datum_candidates(
                hf, lo, hi, self.breaks[j - 1]
            ),
            first_below=lambda combo: self.breaks[0],
        )

    def derived(self, p: Params) -> dict[str, float]:
        """The coefficients of the later segments (:meth:`coefficients`)."""
        return self.coefficients(p)

    def _evaluate(self, p: Params, stage_m: Array, need_grad: bool):
        """Discharge, gradient list (or None) and dQ/dh over all segments."""
        h = np.asarray(stage_m, dtype=float)
        parts = _split(self._sizes(), p)
        k = sum(self._sizes())
        offsets = np.cumsum([0, *self._sizes()])
        q_tot = None
        dq_tot = None
        grads: list[Array] | None = None
        a_val = a_grad = None  # value of the previous segment at the current break, and its grad
        for i, (_, law) in enumerate(self.segments):
            lo = -np.inf if i == 0 else self.breaks[i - 1]
            hi = np.inf if i == len(self.segments) - 1 else self.breaks[i]
            mask = (h > lo) & (h <= hi) if i else h <= hi
            if i == 0:
                q = law.discharge(parts[0], h)
                dq = law.derivative(parts[0], h)
                g = law.gradient(parts[0], h) if need_grad else None
                full = [np.zeros(())] * k
                if g is not None:
                    full[offsets[0] : offsets[1]] = g

                def at(x, _law=law, _p=parts[0]):
                    v = _law.discharge(_p, x)
                    gg = _law.gradient(_p, x)
                    return v, [*gg, *([np.zeros(())] * (k - len(gg)))]

            else:
                unit = [1.0, *parts[i]]
                brk = np.asarray(self.breaks[i - 1])
                gb = law.discharge(unit, brk)
                with np.errstate(divide="ignore", invalid="ignore"):
                    scale = a_val / gb
                gh = law.discharge(unit, h)
                q = scale * gh
                dq = scale * law.derivative(unit, h)
                full = None
                if need_grad:
                    full = [a_grad[j] * gh / gb for j in range(k)]
                    ggh = law.gradient(unit, h)[1:]
                    ggb = law.gradient(unit, brk)[1:]
                    for j, (dh, dbk) in enumerate(zip(ggh, ggb)):
                        full[offsets[i] + j] = a_val * (dh / gb - gh * dbk / gb**2)

                def at(x, _law=law, _unit=unit, _gb=gb, _scale=scale, _a=a_val, _ag=a_grad, _i=i):
                    gx = _law.discharge(_unit, x)
                    v = _scale * gx
                    full_x = [_ag[j] * gx / _gb for j in range(k)]
                    gxx = _law.gradient(_unit, x)[1:]
                    gbb = _law.gradient(_unit, np.asarray(self.breaks[_i - 1]))[1:]
                    for j, (dh, dbk) in enumerate(zip(gxx, gbb)):
                        full_x[offsets[_i] + j] = _a * (dh / _gb - gx * dbk / _gb**2)
                    return v, full_x

            q_tot = np.where(mask, q, 0.0 if q_tot is None else q_tot)
            dq_tot = np.where(mask, dq, 0.0 if dq_tot is None else dq_tot)
            if need_grad:
                if grads is None:
                    grads = [np.where(mask, f, 0.0) for f in full]
                else:
                    grads = [np.where(mask, f, g0) for f, g0 in zip(full, grads)]
            if i < len(self.breaks):
                a_val, a_grad = at(np.asarray(self.breaks[i]))
        return q_tot, grads, dq_tot

    def discharge(self, p: Params, stage_m: Array) -> Array:
        return self._evaluate(p, stage_m, False)[0]

    def gradient(self, p: Params, stage_m: Array) -> list[Array]:
        return self._evaluate(p, stage_m, True)[1]

    def derivative(self, p: Params, stage_m: Array) -> Array:
        return self._evaluate(p, stage_m, False)[2]

    def coefficients(self, p: Params) -> dict[str, float]:
        """The coefficient of every later segment implied by continuity (SI)."""
        parts = _split(self._sizes(), p)
        out: dict[str, float] = {}
        for i in range(1, len(self.segments)):
            name, law = self.segments[i]
            brk = np.asarray(self.breaks[i - 1])
            a = self.discharge(p, brk)
            out[f"{name}.{law.coef_name}"] = float(a / law.discharge([1.0, *parts[i]], brk))
        return out


def compound_law(components: Sequence[tuple[str, PowerFamilyLaw]]) -> CompoundLaw:
    """Controls in parallel, each ``(name, law)``; see :class:`CompoundLaw`."""
    names = [n for n, _ in components]
    if len(components) < 1 or len(set(names)) != len(names):
        raise ConfigError("a compound outlet needs components with distinct names")
    return CompoundLaw(tuple(components))


def segmented_law(
    segments: Sequence[tuple[str, PowerFamilyLaw]], breaks_m: Sequence[float]
) -> SegmentedLaw:
    """Laws over stage ranges with breaks (m) between them; see :class:`SegmentedLaw`."""
    names = [n for n, _ in segments]
    if len(segments) < 2 or len(set(names)) != len(names):
        raise ConfigError("a segmented rating needs at least two segments with distinct names")
    return SegmentedLaw(tuple(segments), tuple(float(b) for b in breaks_m))


def _power(options, where: str) -> PowerFamilyLaw:
    return power_law()


def _orifice(options, where: str) -> PowerFamilyLaw:
    return orifice_law()


def _weir(options, where: str) -> PowerFamilyLaw:
    if options.length is None:
        raise ConfigError(f"{where}: the weir form needs 'length' (crest length, m)")
    return weir_law(options.length)


def _vnotch(options, where: str) -> PowerFamilyLaw:
    if options.angle is None:
        raise ConfigError(f"{where}: the vnotch form needs 'angle' (notch angle, degrees)")
    return vnotch_law(options.angle)


def _controls(options) -> list[tuple[str, PowerFamilyLaw]]:
    """The controls of ``[[outlet.component]]``, each built by its entry of :data:`LAWS`."""
    comps = options.component
    if not comps:
        raise ConfigError(f"[outlet] form = '{options.form}' needs [[outlet.component]] tables")
    out = []
    for c in comps:
        where = f"[[outlet.component]] '{c.name}'"
        entry = LAWS.get(c.form)
        if entry is None or entry.combines:
            raise ConfigError(f"{where}: unknown outlet form {c.form!r}")
        out.append((c.name, entry.build(c, where)))
    return out


def _compound(options, where: str) -> CompoundLaw:
    return compound_law(_controls(options))


def _segmented(options, where: str) -> SegmentedLaw:
    controls = _controls(options)
    uppers = [c.upper for c in options.component[:-1]]
    if any(u is None for u in uppers):
        raise ConfigError("segmented rating: every component but the last needs 'upper' (m)")
    return segmented_law(controls, uppers)  # type: ignore[arg-type]


@dataclass(frozen=True)
class LawEntry:
    """How a form named in the site file becomes a law.

    Parameters
    ----------
    form : str
        The name (``form`` of ``[outlet]`` or ``[[outlet.component]]``).
    build : callable
        ``build(options, where) -> Law`` from an options object with the keys of ``[outlet]``
        (``length``, ``angle``, ``component``, ...); ``where`` names the section in errors.
    combines : bool
        Whether the law combines the ``[[outlet.component]]`` controls (compound, segmented)
        rather than being one control.
    """

    form: str
    build: Callable[[Any, str], Law]
    combines: bool = False


#: Every outlet law, by the name the site file gives it.
LAWS: dict[str, LawEntry] = {
    e.form: e
    for e in (
        LawEntry("power", _power),
        LawEntry("weir", _weir),
        LawEntry("vnotch", _vnotch),
        LawEntry("orifice", _orifice),
        LawEntry("compound", _compound, combines=True),
        LawEntry("segmented", _segmented, combines=True),
    )
}


def law_from_options(options) -> Law:
    """The law an ``[outlet]`` section describes (:class:`~lakebalance.config.OutletOptions`)."""
    entry = LAWS.get(options.form)
    if entry is None:
        raise ConfigError(f"[outlet]: unknown outlet form {options.form!r}")
    return entry.build(options, "[outlet]")


@dataclass(frozen=True)
class Rating:
    """A rating with given parameters (no fit): for what-if runs, tests and fitted curves alike.

    Parameters
    ----------
    law : Law
        The control law.
    params : dict
        Parameter values by name (SI), one for each of ``law.param_names``.
    """

    law: Law
    params: Mapping[str, float]

    def __post_init__(self) -> None:
        missing = [n for n in self.law.param_names if n not in self.params]
        if missing:
            raise ConfigError(f"rating: missing parameter(s) {', '.join(missing)}")

    @property
    def form(self) -> str:
        return self.law.form

    @property
    def param_names(self) -> tuple[str, ...]:
        return self.law.param_names

    @property
    def vector(self) -> Array:
        """Parameter values in ``param_names`` order."""
        return np.array([float(self.params[n]) for n in self.law.param_names])

    def discharge(self, stage_m: Array | float) -> Array:
        """Discharge (m³/s) at ``stage_m`` (m, any shape)."""
        return self.law.discharge(list(self.vector), np.asarray(stage_m, dtype=float))

    def discharge_derivative(self, stage_m: Array | float) -> Array:
        """dQ/dh (m²/s) at ``stage_m`` (m, any shape)."""
        return self.law.derivative(list(self.vector), np.asarray(stage_m, dtype=float))

    def discharge_with(self, params: Array, stage_m: Array) -> Array:
        """Discharge (m³/s) of an ensemble: member i uses ``params[i]`` on ``stage_m[i, ...]``.

        Parameters
        ----------
        params : ndarray (n, k)
            One parameter row per member, columns in ``param_names`` order (SI).
        stage_m : ndarray (n, ...)
            Stages of each member, m.
        """
        return discharge_with(self.law, params, stage_m)


def discharge_with(law: Law, params: Array, stage_m: Array) -> Array:
    """Ensemble discharge: row i of ``params`` (n, k) applies to ``stage_m[i, ...]`` (m)."""
    params = np.asarray(params, dtype=float)
    h = np.asarray(stage_m, dtype=float)
    if params.ndim != 2 or params.shape[1] != len(law.param_names):
        raise ValueError(f"params must have shape (n, {len(law.param_names)})")
    if h.shape[0] != params.shape[0]:
        raise ValueError("stage_m must have one leading row per parameter row")
    shape = (params.shape[0],) + (1,) * (h.ndim - 1)
    return law.discharge([params[:, j].reshape(shape) for j in range(params.shape[1])], h)
