"""``lakebalance rating``: fit the outlet rating curve to the spot gaugings."""

from __future__ import annotations

import argparse

from ._common import (
    LakebalanceWarnings,
    add_step_arguments,
    fold_long_lines,
    open_lake,
    output_folder,
)

HELP = "fit the outlet rating curve to the spot gaugings, with its uncertainty"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_step_arguments(parser)


def run(args: argparse.Namespace) -> int:
    from .._json import dumps
    from ..errors import ConfigError, FitError
    from ..outlet.diagnostics import extrapolation_check, shift_test
    from ..outlet.fit import CAUTION

    lake = open_lake(args)
    out = output_folder(args, lake)
    site, seed = lake.site, lake.seed
    with LakebalanceWarnings():  # collected in fit.warnings
        fit = lake.rating
    if fit is None:
        raise ConfigError("the site file has no [outlet] section", file=site.path)
    messages = list(fit.warnings)
    shift = None
    try:
        shift = shift_test(fit, site.outlet.shift_date)
        messages += shift.messages()
    except FitError as exc:
        messages.append(f"no rating-shift test: {exc.message}")
    stage = None
    if site.series_of("stage"):
        daily = lake.records.daily
        stage = daily["stage"] if "stage" in daily.columns else None
    extra = extrapolation_check(fit, stage) if stage is not None else None
    if extra is not None:
        messages += extra.messages()

    if out is not None:
        _write_outputs(out, fit, stage)

    if args.json:
        fit_doc = fit.to_dict()
        caution = fit_doc.pop("caution")
        fit_doc.pop("warnings")  # stated below with the shift test's and the extrapolation's
        doc = {
            "site": site.site.name,
            **fit_doc,
            "seed": seed,
            "shift_test": None
            if shift is None
            else {
                "by": shift.by,
                "p_value": shift.p_value,
                "first_shift": shift.first_shift,
                "min_gaugings": shift.min_gaugings,
                "change_points": list(shift.change_points),
                "periods": shift.periods,
            },
            "extrapolation": extra,
            "warnings": messages,
            "caution": caution,
        }
        print(dumps(doc))
        return 0
    print(fold_long_lines(str(fit.summary())))
    if shift is not None:
        print()
        print(
            f"rating-shift test ({shift.by}; periods of at least {shift.min_gaugings} gaugings "
            "where the data allow; Holm-corrected):"
        )
        for line in shift.lines():
            print(line)
    for m in messages:
        if m not in fit.warnings:  # those are in the summary's notes
            print(fold_long_lines(f"warning: {m}"))
    print()
    print(fold_long_lines(f"caution: {CAUTION}"))
    if args.out is not None:
        print(f"wrote rating tables and figures to {args.out}")
    return 0


def _write_outputs(out, fit, stage) -> None:
    from ..io.output import save_figure, write_csv
    from ..report.figures_rating import curve_grid, rating_figure, rating_residual_figure

    write_csv(out / "rating_gaugings.csv", fit.table, index=False)
    top = None if stage is None or stage.dropna().empty else float(stage.max())
    h = curve_grid(fit, top)
    conf = fit.predict(h, "confidence").frame()
    pred = fit.predict(h, "prediction").frame()
    conf["prediction_lower_m3s"] = pred["lower_m3s"]
    conf["prediction_upper_m3s"] = pred["upper_m3s"]
    conf = conf.rename(
        columns={"lower_m3s": "confidence_lower_m3s", "upper_m3s": "confidence_upper_m3s"}
    )
    write_csv(out / "rating_curve.csv", conf, index=False)
    save_figure(out / "rating.png", rating_figure(fit, top))
    save_figure(out / "rating_residuals.png", rating_residual_figure(fit))
