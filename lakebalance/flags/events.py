"""Single-day events: residual outliers and stage steps, told apart as spikes and datum shifts."""

from __future__ import annotations

import numpy as np

from .robust import rolling_robust_z


def groups(mask: np.ndarray, gap: int = 0) -> list[tuple[int, int]]:
    """Runs of True positions ``(first, last)``, merging runs separated by ≤ ``gap`` False."""
    pos = np.flatnonzero(mask)
    if pos.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(pos) > gap + 1)
    firsts = np.concatenate([[pos[0]], pos[breaks + 1]])
    lasts = np.concatenate([pos[breaks], [pos[-1]]])
    return [(int(a), int(b)) for a, b in zip(firsts, lasts)]


def is_high(x: np.ndarray | None, a: int, b: int, window: int) -> bool:
    if x is None:
        return False
    z, _, _ = rolling_robust_z(x, window)
    seg = z[a : b + 1]
    return bool(np.isfinite(seg).any() and np.nanmax(seg) > 3.0)


def describe_flows(inflow, rain, i: int, window: int, iso, jump_m3: float = float("nan")) -> str:
    """Inflow and rain of day ``i`` against their usual values and the storage jump (m³)."""
    extra = 0.0
    parts = []
    for name, x in (("inflow", inflow), ("rain", rain)):
        if x is None or not np.isfinite(x[i]):
            continue
        _, med, _ = rolling_robust_z(x, window)
        usual = float(med[i]) if np.isfinite(med[i]) else 0.0
        extra += float(x[i]) - usual
        parts.append(f"{name} {x[i]:,.0f} m³ (usual {usual:,.0f} m³)")
    if not parts:
        return ""
    text = " and ".join(parts) + " that day"
    if np.isfinite(jump_m3) and abs(extra) < 0.5 * abs(jump_m3):
        return f"no matching flow: {text}, against a storage jump of {jump_m3:+,.0f} m³"
    return text
