"""Outlet rating: laws, fit, uncertainty, bad input, diagnostics, gaugings and the command.

Reference checks name their source; simulated gaugings come from known parameters with seeded
noise (the check is recovery of the known truth, not a stored number).
"""

from __future__ import annotations

import json
import math
import warnings

import numpy as np
import pandas as pd
import pytest

from lakebalance import FitError, InputError
from lakebalance.errors import DataQualityWarning, ExtrapolationWarning
from lakebalance.outlet import (
    BROAD_CRESTED_WEIR_CW,
    GRAVITY_M_S2,
    FitOptions,
    Rating,
    compound_law,
    extrapolation_check,
    fit_rating_curve,
    orifice_law,
    power_law,
    segmented_law,
    shift_test,
    vnotch_law,
    weir_law,
)

G = 9.80665  # m/s², standard gravity (NIST SP 811, Appendix B.8)


def simulate(law, truth, h, rng, sigma=0.05):
    """Gaugings from ``truth`` with lognormal noise of ``sigma`` in ln Q."""
    return law.discharge(truth, h) * np.exp(rng.normal(0.0, sigma, h.size))


# ---- laws against handbook forms ---------------------------------------------------------------
def test_broad_crested_weir_matches_critical_flow_theory():
    """Broad-crested weir, Henderson (1966) eq. 6.4 / Chow (1959) §15-2: critical depth 2H/3,
    q = sqrt(g yc^3), so Q = L sqrt(g) (2/3)^1.5 H^1.5 = 1.705 L H^1.5 (SI)."""
    assert BROAD_CRESTED_WEIR_CW == pytest.approx(1.705, abs=5e-4)
    length, crest = 12.0, 3.0
    law = weir_law(length)
    heads = np.array([0.1, 0.5, 1.2])
    yc = 2.0 * heads / 3.0
    expected = length * np.sqrt(G * yc**3)
    q = law.discharge([BROAD_CRESTED_WEIR_CW, crest], crest + heads)
    np.testing.assert_allclose(q, expected, rtol=1e-12)
    assert law.discharge([BROAD_CRESTED_WEIR_CW, crest], np.array([2.9, 3.0])).tolist() == [0, 0]


def test_orifice_law_matches_torricelli_with_cd_061():
    """Orifice Q = Cd A sqrt(2 g H) (Henderson 1966, eq. 1.14); Cd = 0.61 for a sharp-edged
    orifice is from memory. The head runs to the orifice centre, here 0.8 m below gauge zero."""
    cd, area, centre = 0.61, 0.05, -0.8
    k = cd * area * math.sqrt(2 * GRAVITY_M_S2)
    law = orifice_law()
    h = np.array([-1.0, -0.8, 0.0, 1.5])
    q = law.discharge([k, centre], h)
    expected = np.where(h > centre, cd * area * np.sqrt(2 * G * np.maximum(h - centre, 0)), 0)
    np.testing.assert_allclose(q, expected, rtol=1e-12)
    assert q[2] > 0  # flow continues at zero gauge stage until the head is gone


def test_vnotch_90_degree_matches_handbook_coefficient():
    """90° V-notch: Q = (8/15) Cd sqrt(2g) tan(θ/2) H^2.5 (Bos 1989, eq. 5.32); with Cd = 0.58
    (from memory) this is the familiar Q ≈ 1.37 H^2.5 (SI, from memory)."""
    cv = 8.0 / 15.0 * 0.58 * math.sqrt(2 * G)
    q = vnotch_law(90.0).discharge([cv, 0.0], np.array([0.2]))
    assert q[0] == pytest.approx(1.37 * 0.2**2.5, rel=5e-3)


@pytest.mark.parametrize(
    "law,p",
    [
        (power_law(), [2.0, 0.1, 1.7]),
        (weir_law(5.0), [1.7, 1.45]),
        (vnotch_law(60.0), [1.3, 0.05]),
        (orifice_law(), [0.5, -0.4]),
        (
            compound_law([("sill", power_law()), ("spillway", weir_law(10.0))]),
            [3, 0.2, 1.6, 1.6, 1.5],
        ),
        (
            segmented_law([("low", power_law()), ("high", power_law())], [1.0]),
            [3, 0.2, 1.6, 0.5, 2.0],
        ),
    ],
)
def test_analytic_derivatives_match_central_differences(law, p):
    """Jacobian and dQ/dh against central differences (common practice, no source)."""
    h = np.array([0.37, 0.81, 1.13, 1.77, 2.41, 2.93])
    p = np.array(p, float)
    grad = np.stack(np.broadcast_arrays(*law.gradient(list(p), h)), -1)
    eps = 1e-6
    for j in range(p.size):
        step = np.zeros_like(p)
        step[j] = eps
        num = (law.discharge(list(p + step), h) - law.discharge(list(p - step), h)) / (2 * eps)
        np.testing.assert_allclose(grad[:, j], num, rtol=1e-6, atol=1e-7)
    num_h = (law.discharge(list(p), h + eps) - law.discharge(list(p), h - eps)) / (2 * eps)
    np.testing.assert_allclose(law.derivative(list(p), h), num_h, rtol=1e-6, atol=1e-7)


def test_segmented_rating_is_continuous_at_breaks():
    """Each later segment's coefficient is set by continuity (common practice, no source)."""
    law = segmented_law(
        [("low", power_law()), ("mid", weir_law(4.0)), ("high", power_law())], [1.0, 2.0]
    )
    p = [3.0, 0.2, 1.6, 0.5, 0.1, 2.0]
    for b in (1.0, 2.0):
        lo, hi = law.discharge(p, np.array([b - 1e-9, b + 1e-9]))
        assert hi == pytest.approx(lo, rel=1e-7)
    assert set(law.coefficients(p)) == {"mid.Cw", "high.C"}


def test_ensemble_discharge_uses_each_members_parameters():
    law = compound_law([("sill", power_law()), ("spillway", weir_law(10.0))])
    params = np.array([[3, 0.2, 1.6, 1.6, 1.5], [2.5, 0.3, 1.8, 1.5, 1.2]])
    h = np.array([[0.5, 1.0, 1.8], [0.4, 1.3, 2.2]])
    rating = Rating(law, dict(zip(law.param_names, params[0])))
    out = rating.discharge_with(params, h)
    for i in range(2):
        single = Rating(law, dict(zip(law.param_names, params[i]))).discharge(h[i])
        np.testing.assert_allclose(out[i], single, rtol=1e-14)


# ---- fitting --------------------------------------------------------------------------------------
def test_fit_recovers_power_law_and_intervals_are_consistent():
    rng = np.random.default_rng(11)
    law = power_law()
    truth = [4.0, 0.1, 1.6]
    h = rng.uniform(0.3, 2.5, 40)
    fit = fit_rating_curve(law, h, simulate(law, truth, h, rng))
    # one replicate: the truth lies in the joint 99.9 % likelihood region (Beale 1960); the
    # calibration of the 95 % Wald intervals is the coverage test below
    assert fit.region_contains(dict(zip(law.param_names, truth)), alpha=0.001)
    assert not fit.region_contains({"C": 4.0, "e": 0.1, "b": 1.9})
    assert fit.params["b"] == pytest.approx(1.6, abs=0.15)
    pred = fit.predict(np.array([0.5, 1.5, 3.0]), "prediction")
    conf = fit.predict(np.array([0.5, 1.5, 3.0]), "confidence")
    assert np.all(pred.lower_m3s < conf.lower_m3s) and np.all(conf.upper_m3s < pred.upper_m3s)
    assert 3.0 < fit.se_percent < 7.0  # noise of 5 %
    assert "C" in str(fit.summary())


def test_coverage_of_95_percent_intervals_over_200_replicates():
    """200 seeded replicates, 5 % lognormal noise: the truth lies inside each 95 % Wald interval
    in at least 90 % of the replicates (nominal 95 %; Seber & Wild 1989, §5.1)."""
    rng = np.random.default_rng(2024)
    law = power_law()
    truth = np.array([2.5, 0.4, 1.8])
    hits = np.zeros(3)
    for _ in range(200):
        h = rng.uniform(0.6, 3.0, 30)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DataQualityWarning)
            fit = fit_rating_curve(law, h, simulate(law, truth, h, rng))
        ci = fit.conf_int()
        hits += [ci[n][0] <= t <= ci[n][1] for n, t in zip(law.param_names, truth)]
    assert np.all(hits / 200 >= 0.90), hits / 200


def test_compound_fit_recovers_sill_and_spillway():
    rng = np.random.default_rng(5)
    law = compound_law([("sill", power_law()), ("spillway", weir_law(12.0))])
    truth = [3.0, 0.2, 1.7, 1.6, 1.8]
    h = np.sort(rng.uniform(0.3, 2.6, 60))
    fit = fit_rating_curve(law, h, simulate(law, truth, h, rng))
    assert fit.region_contains(dict(zip(law.param_names, truth)), alpha=0.001)  # Beale (1960)
    np.testing.assert_allclose(fit.vector, truth, rtol=0.1, atol=0.05)  # datums: 5 cm


def test_segmented_fit_recovers_truth():
    rng = np.random.default_rng(8)
    law = segmented_law([("low", power_law()), ("high", power_law())], [1.2])
    truth = [3.0, 0.2, 1.6, 0.6, 2.2]
    h = np.sort(rng.uniform(0.3, 2.6, 80))
    fit = fit_rating_curve(law, h, simulate(law, truth, h, rng, 0.03))
    assert fit.region_contains(dict(zip(law.param_names, truth)), alpha=0.001)  # Beale (1960)
    np.testing.assert_allclose(fit.vector, truth, rtol=0.1, atol=0.05)  # datums: 5 cm


def test_zero_flow_gaugings_bound_the_datum_and_are_reported():
    rng = np.random.default_rng(3)
    law = power_law()
    h = rng.uniform(0.5, 2.0, 25)
    q = simulate(law, [4.0, 0.35, 1.6], h, rng)
    hz = np.array([0.2, 0.3, 0.34])
    fit = fit_rating_curve(law, np.r_[hz, h], np.r_[np.zeros(3), q])
    assert fit.zero_flow_stage_m == pytest.approx(0.34)
    assert fit.params["e"] >= 0.34
    assert fit.n == 25 and fit.gauged_range[0] == pytest.approx(0.2)
    notes = fit.table["note"].iloc[:3].tolist()
    assert all("zero flow" in n for n in notes)


def test_zero_flow_above_flowing_gauging_is_excluded_with_warning():
    rng = np.random.default_rng(4)
    h = rng.uniform(0.5, 2.0, 20)
    q = simulate(power_law(), [4.0, 0.35, 1.6], h, rng)
    with pytest.warns(DataQualityWarning, match="contradictory"):
        fit = fit_rating_curve(power_law(), np.r_[h, 1.0], np.r_[q, 0.0])
    assert not fit.table["used"].iloc[-1]


def test_fixed_and_bounded_parameters_are_honoured():
    rng = np.random.default_rng(6)
    h = rng.uniform(0.5, 2.0, 20)
    q = simulate(power_law(), [4.0, 0.2, 1.6], h, rng)
    fit = fit_rating_curve(
        power_law(), h, q, options=FitOptions(fixed={"e": 0.2}, bounds={"b": (1.0, 1.55)})
    )
    assert fit.params["e"] == 0.2 and fit.stderr["e"] == 0.0
    assert fit.params["b"] <= 1.55 + 1e-12


def test_unknown_parameter_name_suggests_the_nearest():
    from lakebalance import ConfigError

    with pytest.raises(ConfigError, match="did you mean 'e'"):
        fit_rating_curve(
            power_law(), [1, 2, 3, 4], [1, 2, 3, 4], options=FitOptions(fixed={"ee": 0})
        )


def test_linear_weighted_residuals():
    rng = np.random.default_rng(9)
    law = weir_law(8.0)
    h = rng.uniform(1.1, 2.0, 30)
    q = law.discharge([1.7, 1.0], h) + rng.normal(0, 0.05, h.size)
    fit = fit_rating_curve(
        law, h, q, weights=np.full(h.size, 4.0), options=FitOptions(residuals="linear")
    )
    ci = fit.conf_int()
    assert ci["Cw"][0] < 1.7 < ci["Cw"][1] and ci["crest"][0] < 1.0 < ci["crest"][1]


def test_bootstrap_spread_agrees_with_delta_method():
    """Residual bootstrap (Davison & Hinkley 1997, Alg. 6.1) vs delta-method standard errors."""
    rng = np.random.default_rng(12)
    law = power_law()
    h = rng.uniform(0.3, 2.5, 60)
    q = simulate(law, [4.0, 0.1, 1.6], h, rng)
    fit = fit_rating_curve(law, h, q, options=FitOptions(bootstrap=1000), rng=rng)
    boot_sd = fit.bootstrap_params.std(axis=0)
    se = np.array([fit.stderr[n] for n in fit.param_names])
    np.testing.assert_allclose(boot_sd, se, rtol=0.25)
    band = fit.predict(np.array([1.0, 2.0]), "confidence")
    delta = fit.predict(np.array([1.0, 2.0]), "confidence", method="delta")
    np.testing.assert_allclose(band.upper_m3s, delta.upper_m3s, rtol=0.03)


def test_sample_params_follow_the_covariance():
    rng = np.random.default_rng(13)
    h = rng.uniform(0.3, 2.5, 50)
    fit = fit_rating_curve(power_law(), h, simulate(power_law(), [4.0, 0.1, 1.6], h, rng))
    draws = fit.sample_params(np.random.default_rng(1), 20000)
    np.testing.assert_allclose(draws.mean(0), fit.vector, rtol=2e-3)
    np.testing.assert_allclose(draws.std(0), np.sqrt(np.diag(fit.cov)), rtol=0.05)


# ---- bad input ----------------------------------------------------------------------------------
def test_fewer_gaugings_than_parameters_is_a_fit_error():
    with pytest.raises(FitError, match="cannot fit 3 free parameter"):
        fit_rating_curve(power_law(), [1.0, 2.0, 3.0], [1.0, 3.0, 6.0])


def test_gaugings_all_at_one_stage_is_a_fit_error():
    with pytest.raises(FitError, match="distinct stage"):
        fit_rating_curve(power_law(), [1.0] * 6, [2.0, 2.1, 1.9, 2.0, 2.05, 1.95])


def test_only_zero_flows_is_a_fit_error():
    with pytest.raises(FitError, match="zero-flow gaugings alone"):
        fit_rating_curve(power_law(), [0.1, 0.2, 0.3, 0.4], [0.0, 0.0, 0.0, 0.0])


def test_negative_and_missing_values_are_flagged_exclusions():
    rng = np.random.default_rng(14)
    h = rng.uniform(0.5, 2.0, 20)
    q = simulate(power_law(), [4.0, 0.2, 1.6], h, rng)
    q[3] = -1.0
    h[5] = np.nan
    with pytest.warns(DataQualityWarning) as record:
        fit = fit_rating_curve(power_law(), h, q)
    text = " ".join(str(w.message) for w in record)
    assert "negative discharge" in text and "missing" in text
    assert fit.n == 18
    assert fit.table.loc[3, "note"] == "negative discharge"


# ---- diagnostics ------------------------------------------------------------------------------
def _dated_fit(shift: float, seed: int):
    rng = np.random.default_rng(seed)
    n = 60
    dates = pd.date_range("2010-01-01", periods=n, freq="30D")
    h = rng.uniform(0.5, 2.5, n)
    q = simulate(power_law(), [4.0, 0.1, 1.6], h, rng)
    q[dates >= "2013-01-01"] *= 1 + shift
    return fit_rating_curve(power_law(), h, q, dates=dates)


def test_shift_test_detects_a_15_percent_shift_after_a_date():
    test = shift_test(_dated_fit(0.15, 1), "2013-01-01")
    assert test.p_value < 1e-3
    assert test.first_shift is not None
    assert test.periods["n"].sum() == 60


def test_shift_test_per_year_quiet_without_shift():
    test = shift_test(_dated_fit(0.0, 2), by="year")
    assert test.by == "year" and len(test.periods) >= 4
    assert test.periods["n"].min() >= 5  # years pooled to hold enough gaugings
    assert not test.periods["shifted"].any()  # Holm-corrected: no period at 5 % familywise


def test_shift_test_without_dates_is_a_fit_error():
    rng = np.random.default_rng(3)
    h = rng.uniform(0.5, 2.0, 20)
    fit = fit_rating_curve(power_law(), h, simulate(power_law(), [4.0, 0.2, 1.6], h, rng))
    with pytest.raises(FitError, match="no dates"):
        shift_test(fit)


def test_extrapolation_check_counts_days_and_distance():
    rng = np.random.default_rng(3)
    h = np.linspace(0.5, 2.0, 20)
    fit = fit_rating_curve(power_law(), h, simulate(power_law(), [4.0, 0.2, 1.6], h, rng))
    days = pd.date_range("2020-01-01", periods=10)
    stage = pd.Series([1.0, 1.5, 2.2, 2.5, 1.0, np.nan, 0.3, 1.0, 1.0, 1.0], index=days)
    chk = extrapolation_check(fit, stage)
    assert chk.days == 9
    assert chk.share_above == pytest.approx(2 / 9) and chk.max_above_m == pytest.approx(0.5)
    assert chk.share_below == pytest.approx(1 / 9) and chk.max_below_m == pytest.approx(0.2)
    assert chk.first_above == "2020-01-03"
    with pytest.warns(ExtrapolationWarning):
        chk.warn()


# ---- gaugings file, site file and command ---------------------------------------------------------
def test_gaugings_file_in_litres_per_second_through_the_site(write):
    from lakebalance import Lake, load_site

    rng = np.random.default_rng(21)
    h = np.linspace(0.4, 2.4, 15)
    q = simulate(power_law(), [4.0, 0.2, 1.6], h, rng) * 1000.0  # L/s
    lines = ["when;level;flow"] + [
        f"{d:%d/%m/%Y};{a:.4f};{b:.2f}"
        for d, a, b in zip(pd.date_range("2015-03-01", periods=15, freq="MS"), h, q)
    ]
    write("g.csv", "\n".join(lines) + "\n")
    site = write(
        "site.toml",
        '[site]\nname = "Invented Pond"\n[outlet]\ngaugings = "g.csv"\ndate = "when"\n'
        'stage = "level"\ndischarge = "flow"\ndischarge_units = "L/s"\ndelimiter = ";"\n'
        "dayfirst = true\n",
    )
    fit = Lake(load_site(site)).rating
    assert fit.params["C"] == pytest.approx(4.0, rel=0.15)
    assert fit.table["date"].iloc[1] == pd.Timestamp("2015-04-01")


def test_gaugings_missing_column_names_file(write):
    from lakebalance import Lake, load_site

    write("g.csv", "date,stage,flow\n2020-01-01,1.0,2.0\n")
    site = write("site.toml", '[site]\nname = "Invented Pond"\n[outlet]\ngaugings = "g.csv"\n')
    with pytest.raises(InputError, match="discharge") as exc:
        _ = Lake(load_site(site)).rating
    assert exc.value.file.endswith("g.csv")


def test_rating_command_recovers_the_demo_outlet(demo_site_path, capsys):
    """The demo's planted outlet law (data_demo/truth.json) lies inside the reported 95 % CIs."""
    from lakebalance.cli import main

    assert main(["rating", str(demo_site_path), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    truth = json.loads((demo_site_path.parent / "truth.json").read_text())["outlet"]
    assert doc["form"] == truth["form"] == "compound"
    for comp in ("sill", "spillway"):
        for name, value in truth[comp].items():
            key = f"{comp}.{name}"
            if key not in doc["parameters"]:
                continue  # form, length: not parameters
            p = doc["parameters"][key]
            if p["fixed"]:
                assert p["value"] == pytest.approx(value)
            else:
                assert p["ci95"][0] <= value <= p["ci95"][1], key
    assert doc["n"] > 0 and doc["se_percent"] > 0 and len(doc["gauged_range"]) == 2
    extra = doc["extrapolation"]
    assert extra["days"] > 0
    assert (extra["share_above"] > 0) == any(
        "above the highest gauging" in w for w in doc["warnings"]
    )
    assert "licensed professional" in doc["caution"]


def test_rating_command_writes_tables_and_figures(demo_site_path, tmp_path, capsys):
    from lakebalance.cli import main

    assert main(["rating", str(demo_site_path), "--out", str(tmp_path)]) == 0
    assert "Rating curve (compound)" in capsys.readouterr().out
    for name in ("rating_gaugings.csv", "rating_curve.csv", "rating.png", "rating_residuals.png"):
        assert (tmp_path / name).stat().st_size > 0
    curve = pd.read_csv(tmp_path / "rating_curve.csv")
    assert (curve["confidence_lower_m3s"] <= curve["discharge_m3s"]).all()
