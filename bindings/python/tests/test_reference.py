# SPDX-License-Identifier: GPL-3.0-or-later
"""Growth rates from the binding against statsmodels (Debian
python3-statsmodels) fitted live on the same data, and handbook formulas.

The data are invented: counts drawn by numpy's PCG64 generator with fixed
seeds (see make_window), so every run sees the same numbers.
"""
import math

import numpy as np
import pytest
import scipy.stats
import statsmodels.api as sm

import twofold

START = "2025-03-03"          # a Monday
RTOL = 1e-6                   # relative tolerance asked of every check


def make_window(seed, n=28, level=60.0, rate=0.04, missing=(), theta=None):
    """Invented counts: log mu_t = log(level) + rate*t + weekday effect."""
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    weekday = t % 7                       # 0 = Monday (START is a Monday)
    effect = np.array([0.15, 0.1, 0.05, 0.0, -0.05, -0.25, -0.3])[weekday]
    mu = level * np.exp(rate * t + effect)
    if theta is None:
        y = rng.poisson(mu).astype(float)
    else:
        y = rng.negative_binomial(theta, theta / (theta + mu)).astype(float)
    for i in missing:
        y[i] = np.nan
    return y


def design(n, present):
    """Intercept, day index and treatment-coded weekday dummies."""
    t = np.arange(n, dtype=float)
    weekday = np.arange(n) % 7
    cols = [np.ones(n), t] + [(weekday == d).astype(float) for d in range(1, 7)]
    return np.column_stack(cols)[present]


def statsmodels_glm(y, family, scale=None):
    present = ~np.isnan(y)
    X = design(len(y), present)
    res = sm.GLM(y[present], X, family=family).fit(
        scale=scale, tol=1e-13, maxiter=200)
    lo, hi = res.conf_int(alpha=0.05)[1]
    return res.params[1], res.bse[1], lo, hi


@pytest.mark.parametrize("seed,missing", [(11, ()), (12, (3, 17, 18)),
                                          (13, ())])
def test_poisson_wald_equals_statsmodels_glm(seed, missing):
    # Reference: statsmodels GLM, Poisson family, log link, y ~ t + weekday
    # factor; Wald interval params +- z_{0.975} * bse (statsmodels conf_int).
    y = make_window(seed, missing=missing, rate=0.03 * (seed - 12))
    r, se, lo, hi = statsmodels_glm(y, sm.families.Poisson())
    fit = twofold.fit_window(y, START, model="poisson", weekday=True,
                             interval="wald", level=0.95)
    assert fit.model == "poisson"
    assert fit.rate == pytest.approx(r, rel=RTOL)
    assert fit.rate_se == pytest.approx(se, rel=RTOL)
    assert fit.rate_lo == pytest.approx(lo, rel=RTOL)
    assert fit.rate_hi == pytest.approx(hi, rel=RTOL)
    assert fit.interval("wald") == pytest.approx((lo, hi), rel=RTOL)
    assert fit.days_used == len(y) - len(missing)
    assert fit.days_missing == len(missing)
    assert ("missing_days" in fit.flags) == bool(missing)


def test_quasipoisson_equals_statsmodels_glm_pearson_scale():
    # Reference: statsmodels GLM Poisson with scale="X2" (Pearson chi^2 /
    # residual df), the quasi-Poisson standard error.
    y = make_window(21, theta=8.0)
    r, se, lo, hi = statsmodels_glm(y, sm.families.Poisson(), scale="X2")
    fit = twofold.fit_window(y, START, model="quasipoisson", interval="wald")
    assert fit.rate == pytest.approx(r, rel=RTOL)
    assert fit.rate_se == pytest.approx(se, rel=RTOL)
    assert (fit.rate_lo, fit.rate_hi) == pytest.approx((lo, hi), rel=RTOL)


def test_negbin_equals_statsmodels_nb2():
    # Reference: statsmodels discrete NegativeBinomial (NB2) maximum
    # likelihood for r and alpha = 1/theta; the standard error of r with
    # theta held at its estimate from statsmodels GLM NegativeBinomial
    # (the convention of R's MASS::glm.nb, Venables & Ripley 2002).
    y = make_window(31, theta=10.0, level=80.0)
    X = design(len(y), np.ones(len(y), dtype=bool))
    nb = sm.NegativeBinomial(y, X, loglike_method="nb2").fit(
        method="newton", maxiter=200, tol=1e-14, disp=False)
    alpha = nb.params[-1]
    fit = twofold.fit_window(y, START, model="negbin", interval="wald")
    assert fit.rate == pytest.approx(nb.params[1], rel=RTOL)
    assert fit.theta == pytest.approx(1.0 / alpha, rel=1e-5)
    r, se, lo, hi = statsmodels_glm(y, sm.families.NegativeBinomial(
        alpha=alpha))
    assert fit.rate_se == pytest.approx(se, rel=1e-5)
    assert (fit.rate_lo, fit.rate_hi) == pytest.approx((lo, hi), rel=1e-5)


def test_wald_level_uses_normal_quantile():
    # Reference: scipy.stats.norm.ppf for the Wald interval r +- z * SE.
    y = make_window(41)
    fit = twofold.fit_window(y, START, model="poisson", interval="wald",
                             level=0.9)
    z = scipy.stats.norm.ppf(0.95)
    assert fit.level == pytest.approx(0.9, rel=1e-12)
    assert fit.rate_lo == pytest.approx(fit.rate - z * fit.rate_se, rel=RTOL)
    assert fit.rate_hi == pytest.approx(fit.rate + z * fit.rate_se, rel=RTOL)


def test_rolling_matches_window_fits():
    # Each day's rolling estimate equals a statsmodels GLM on its window.
    y = np.concatenate([make_window(51, n=30, rate=0.05),
                        make_window(52, n=30, level=200, rate=-0.03)])
    w = 21
    roll = twofold.roll_window(y, w, START, model="poisson", interval="wald")
    assert len(roll) == len(y)
    assert np.isnan(roll.rate[: w - 1]).all()
    assert (roll.status[: w - 1] != 0).all()
    for i in (w - 1, 35, len(y) - 1):
        window = y[i - w + 1: i + 1]
        # the window must start on a Monday for design(); shift weekdays
        shift = (i - w + 1) % 7
        present = np.ones(w, dtype=bool)
        t = np.arange(w, dtype=float)
        wd = (np.arange(w) + shift) % 7
        X = np.column_stack([np.ones(w), t] +
                            [(wd == d).astype(float) for d in range(1, 7)])
        res = sm.GLM(window[present], X, family=sm.families.Poisson()).fit(
            tol=1e-13, maxiter=200)
        lo, hi = res.conf_int(alpha=0.05)[1]
        assert roll.status[i] == 0
        assert roll.rate[i] == pytest.approx(res.params[1], rel=RTOL)
        assert roll.rate_lo[i] == pytest.approx(lo, rel=RTOL)
        assert roll.rate_hi[i] == pytest.approx(hi, rel=RTOL)


def test_doubling_time_handbook_formula():
    # Handbook formula: doubling time ln 2 / r; halving time ln 2 / |r|.
    d = twofold.doubling_time(0.05, 0.03, 0.07)
    assert d.sense == 1
    assert d.time == pytest.approx(math.log(2) / 0.05, rel=1e-12)
    assert (d.lo, d.hi) == pytest.approx((math.log(2) / 0.07,
                                          math.log(2) / 0.03), rel=1e-12)
    d = twofold.doubling_time(-0.02, -0.03, -0.01)
    assert d.sense == -1
    assert d.time == pytest.approx(math.log(2) / 0.02, rel=1e-12)
    # interval containing zero: one end unbounded, never negative or NaN
    d = twofold.doubling_time(0.01, -0.01, 0.03)
    assert d.sense == 1 and math.isinf(d.hi) and d.lo > 0
    arr = twofold.doubling_time(np.array([0.05, np.nan]),
                                np.array([0.03, np.nan]),
                                np.array([0.07, np.nan]))
    assert arr.time[0] == pytest.approx(math.log(2) / 0.05, rel=1e-12)
    assert np.isnan(arr.time[1]) and arr.sense[1] == 0


def test_reproduction_gamma_closed_form():
    # Wallinga & Lipsitch (2007, Proc R Soc B 274:599-604), eq. for a gamma
    # generation interval with shape k and scale s: R = (1 + r s)^k.
    mean, sd = 5.0, 2.0
    k, s = (mean / sd) ** 2, sd ** 2 / mean
    gi = twofold.GenerationInterval.gamma(mean, sd)
    assert gi.mean == pytest.approx(mean, rel=1e-12)
    assert gi.sd == pytest.approx(sd, rel=1e-12)
    for r in (-0.1, 0.0, 0.05, 0.2):
        assert gi.reproduction(r) == pytest.approx((1 + r * s) ** k, rel=1e-9)
    R, lo, hi = twofold.reproduction_number(0.05, gi, 0.02, 0.08)
    assert (R, lo, hi) == pytest.approx(
        tuple((1 + r * s) ** k for r in (0.05, 0.02, 0.08)), rel=1e-9)
    # discrete interval: R = 1 / sum_k p_k exp(-r k) (same paper)
    p = np.array([0.1, 0.3, 0.4, 0.2])
    gi = twofold.GenerationInterval.discrete(p)
    r = 0.07
    expect = 1.0 / np.sum(p * np.exp(-r * np.arange(1, 5)))
    assert gi.reproduction(r) == pytest.approx(expect, rel=1e-9)
