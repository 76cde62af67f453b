"""The ``[flags]`` options: thresholds of the detectors, with their units and ranges."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from ..options import Options, setting


@dataclass(frozen=True)
class FlagOptions(Options):
    """``[flags]``: detection of unexplained residuals."""

    outlier_threshold: float = setting(5.0, unit="-", low=0.0, low_open=True)  # robust z
    outlier_window: int = setting(31, unit="days", low=3)  # centred rolling median/MAD window
    spike_days: int = setting(3, unit="days", low=1)  # a stage step undone within = a spike
    penalty: float | None = setting(None, unit="(m3/d)^2", low=0.0, low_open=True)  # default BIC
    change_method: Literal["pelt", "binseg"] = "pelt"  # change-point search
    min_run_days: int = setting(14, unit="days", low=2)  # shortest run or level-shift segment
    run_threshold: float = setting(4.0, unit="-", low=0.0, low_open=True)  # z of a run's volume
    min_run_effect: float = setting(0.5, unit="sigma", low=0.0)  # smallest mean departure
    cusum_slack: float = setting(0.5, unit="sigma", low=0.0)  # CUSUM reference value k
    cusum_threshold: float = setting(10.0, unit="sigma", low=0.0, low_open=True)  # CUSUM h
    drift_min_days: int = setting(180, unit="days", low=10)  # shortest segment tested for drift
    drift_alpha: float = setting(
        0.001, unit="-", low=0.0, high=1.0, low_open=True, high_open=True
    )  # significance level of the drift test
    # significance (volume / its 1-σ under the balance's error model) a run must reach
    significance_threshold: float = setting(4.0, unit="-", low=0.0)
    # longest offset period: a step and its undoing within it are one flag
    offset_max_days: int = setting(200, unit="days", low=1)
    # fewest repeated daily stages tested as a stuck sensor
    stuck_days: int = setting(4, unit="days", low=2)
    # significance under the error model of the residual over repeated stages (stuck sensor)
    stuck_threshold: float = setting(3.0, unit="-", low=0.0)
    shift_stage_z: float = setting(2.0, unit="-", low=0.0)  # robust z of a mirrored stage step
