"""Outlet rating curves: control laws, the fit with its uncertainty, and diagnostics.

``laws`` holds the control forms (power, weir, V-notch, orifice, compound, segmented); ``fit``
fits them to gaugings (:func:`fit_rating_curve` -> :class:`RatingFit`); ``nls`` is the generic
least-squares engine under the fit; ``diagnostics`` tests rating shifts and extrapolation.
"""

from __future__ import annotations

from .diagnostics import ExtrapolationCheck, ShiftTest, extrapolation_check, shift_test
from .fit import FitOptions, Prediction, RatingFit, RatingSummary, fit_rating_curve
from .laws import (
    BROAD_CRESTED_WEIR_CW,
    GRAVITY_M_S2,
    CompoundLaw,
    Law,
    PowerFamilyLaw,
    Rating,
    SegmentedLaw,
    compound_law,
    discharge_with,
    law_from_options,
    orifice_law,
    power_law,
    segmented_law,
    vnotch_law,
    weir_law,
)
from .nls import LeastSquaresResult, fit_curve, solve_least_squares

__all__ = [
    "BROAD_CRESTED_WEIR_CW",
    "GRAVITY_M_S2",
    "CompoundLaw",
    "ExtrapolationCheck",
    "FitOptions",
    "Law",
    "LeastSquaresResult",
    "PowerFamilyLaw",
    "Prediction",
    "Rating",
    "RatingFit",
    "RatingSummary",
    "SegmentedLaw",
    "ShiftTest",
    "compound_law",
    "discharge_with",
    "extrapolation_check",
    "fit_curve",
    "fit_rating_curve",
    "law_from_options",
    "orifice_law",
    "power_law",
    "segmented_law",
    "shift_test",
    "solve_least_squares",
    "vnotch_law",
    "weir_law",
]
