# SPDX-License-Identifier: GPL-3.0-or-later
"""Changepoint wrappers: types in and out, errors, and recovery of a known
change in invented data (numpy PCG64, fixed seed).  The statistics are
checked in the library's own tests (tests/check_changes.c); here the check
is that the binding hands the library's posterior over intact: per-day
arrays of the right length and range, the most probable change at the
invented truth, and probabilities that add up (a property of any
posterior: P(K = m) sums to 1 and E[K] = sum of P(change on day i))."""
import datetime

import numpy as np
import pytest

import twofold

START = datetime.date(2025, 1, 6)          # a Monday
TRUE_CHANGE = 60                           # first day of the new regime


def invented(seed=5, n=120):
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    eta = np.log(50) + np.where(t < TRUE_CHANGE, 0.03 * t,
                                0.03 * TRUE_CHANGE - 0.04 * (t - TRUE_CHANGE))
    return rng.poisson(np.exp(eta)).astype(float)


def test_jump_recovers_invented_change():
    y = invented()
    res = twofold.find_changes(y, START, kind="jump")
    assert res.kind == "jump"
    assert len(res) == len(y) and res.p_change.shape == (len(y),)
    assert res.p_change[0] == 0
    assert ((res.p_change >= 0) & (res.p_change <= 1 + 1e-12)).all()
    assert sum(res.count_prob) + res.count_tail == pytest.approx(1, abs=1e-9)
    assert res.p_change.sum() == pytest.approx(res.count_mean, rel=1e-6)
    assert len(res.changes) == 1
    ch = res.changes[0]
    assert abs(ch.day - TRUE_CHANGE) <= 3
    assert ch.date == START + datetime.timedelta(days=ch.day)
    assert ch.date_from <= ch.date <= ch.date_to
    assert len(res.segments) == 2
    assert res.segments[0].start == START
    assert res.segments[0].rate == pytest.approx(0.03, abs=0.005)
    assert res.segments[1].rate == pytest.approx(-0.04, abs=0.005)
    frame = res.to_frame()
    assert frame["date"].iloc[0].date() == START
    assert list(frame.columns[:3]) == ["date", "p_change", "rate"]


def test_sampling_is_seeded():
    res = twofold.find_changes(invented(), START, kind="jump")
    a = res.sample(20, seed=7)
    b = res.sample(20, seed=7)
    for x, y in zip(a, b):
        np.testing.assert_array_equal(x, y)
    change, rate, count = a
    assert change.shape == rate.shape == (20, 120)
    np.testing.assert_array_equal(change.sum(axis=1), count)


def test_changepoint_errors():
    with pytest.raises(twofold.TwofoldError) as info:
        twofold.find_changes(invented(), START, min_segment=0)
    assert info.value.code == twofold.CODES["ERANGE"]
    assert "0" in info.value.message
    with pytest.raises(twofold.TwofoldError) as info:
        twofold.find_changes([1, -1, 3, 4], START)
    assert info.value.code in (twofold.CODES["ECOUNT"], twofold.CODES["EINVAL"])
    with pytest.raises(twofold.TwofoldError):
        twofold.find_changes(invented(), START, kind="sideways")


def test_online_filter_follows_offline_posterior():
    # With pruning off and room for every candidate the online filter
    # reproduces the offline run (libtwofold(3)): the sum of one-step log
    # predictives is the log evidence, and P(a change in the last 7 days)
    # is the sum of the offline P(change) over them (segments of at least
    # 7 days hold at most one change there).
    y = invented()
    opts = dict(prune=0, level_prior=(1.0, 0.02), dispersion=1.0,
                weekday=False)
    off = twofold.find_changes(y, START, **opts)
    on = twofold.OnlineChanges(1000, 1, start=START, **opts)
    total = 0.0
    for c in y:
        on.add(c)
        total += on.log_predictive
    assert on.days == len(y)
    assert on.today == START + datetime.timedelta(days=len(y) - 1)
    assert total == pytest.approx(off.log_evidence, abs=1e-7)
    assert on.p_recent(7) == pytest.approx(float(np.sum(off.p_change[-7:])),
                                           abs=1e-9)
    m, lo, hi = on.growth()
    assert lo <= -0.04 <= hi and lo <= m <= hi


def test_online_filter_bad_count_raises():
    on = twofold.OnlineChanges(50, 3, start=START)
    with pytest.raises(twofold.TwofoldError) as err:
        on.add(-1)
    assert "count" in str(err.value)
