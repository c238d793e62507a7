"""Zeros of J_m (auditor.physics.bessel) against a published table and scipy.special.jn_zeros;
J_m of every order at once against scipy.special.jv."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import jn_zeros, jv

from auditor.physics.bessel import bessel_j_orders, bessel_zeros, bessel_zeros_below


@pytest.mark.parametrize(("order", "rank", "zero"), [
    # Abramowitz & Stegun, Handbook of Mathematical Functions, Table 9.5 (values quoted from
    # memory to ten digits; each agrees with scipy.special.jn_zeros to 1e-10)
    (0, 1, 2.4048255577), (0, 2, 5.5200781103), (0, 3, 8.6537279129),
    (1, 1, 3.8317059702), (1, 2, 7.0155866698), (2, 1, 5.1356223018),
    (3, 1, 6.3801618959), (5, 1, 8.7714838160), (10, 1, 14.4755006866),
])
def test_zeros_match_the_published_table(order, rank, zero):
    assert bessel_zeros(order, rank)[rank - 1] == pytest.approx(zero, abs=1e-9)


@settings(max_examples=60, deadline=None)
@given(order=st.integers(0, 400), count=st.integers(1, 120))
def test_zeros_match_scipy_for_any_order_and_count(order, count):
    # scipy.special.jn_zeros (a general-purpose reference library), to rounding
    np.testing.assert_allclose(bessel_zeros(order, count), jn_zeros(order, count), rtol=4e-15)


def test_every_zero_below_a_bound_is_found_once():
    # each order's zeros below 120 from scipy.special.jn_zeros; none missing, none repeated
    order, rank, zero = bessel_zeros_below(120.0)
    expected = []
    for m in range(121):
        found = jn_zeros(m, 60)
        expected += [(m, n + 1, z) for n, z in enumerate(found[found <= 120.0])]
    assert [(int(a), int(b)) for a, b in zip(order, rank)] == [(m, n) for m, n, _ in expected]
    np.testing.assert_allclose(zero, [z for *_, z in expected], rtol=4e-15)


def test_slopes_at_the_zeros_match_scipy():
    # J_{m+1} at each zero of J_m (the scale of a circular membrane's mode shape), from the
    # recurrence and the Newton step, against scipy.special.jv (a general-purpose reference
    # library) at the zeros below 256
    from auditor.physics.bessel import zeros_and_slopes_below

    order, _, zero, slope = zeros_and_slopes_below(256.0)
    assert len(zero) == 8164
    np.testing.assert_allclose(slope, jv(order + 1.0, zero), rtol=1e-12)


def test_zeros_are_right_when_the_section_is_too_small(monkeypatch):
    # A section too small for its zeros fails the Newton step's check, and that order is
    # solved again on its own with a larger one: the zeros still match scipy.special.jn_zeros.
    import auditor.physics.bessel as bessel

    monkeypatch.setattr(bessel, "_section_size", lambda order, count: count + 2)
    order, rank, zero, slope = bessel._zeros_below(60.0)
    for m in (0, 1, 10, 40, 50):
        mine = zero[order == m]
        np.testing.assert_allclose(mine, jn_zeros(m, len(mine)), rtol=4e-15)
        assert mine[-1] <= 60.0 < jn_zeros(m, len(mine) + 1)[-1]
    np.testing.assert_allclose(slope, jv(order + 1.0, zero), rtol=1e-12)


def test_zeros_are_read_only_and_arguments_checked():
    zeros = bessel_zeros(2, 3)
    with pytest.raises(ValueError):
        zeros[0] = 1.0
    with pytest.raises(ValueError, match="order must be"):
        bessel_zeros(-1, 3)
    assert bessel_zeros_below(0.0)[2].size == 0


@settings(max_examples=30, deadline=None)
@given(first=st.integers(0, 250), count=st.integers(1, 64), seed=st.integers(0, 2**32 - 1))
def test_every_order_at_once_matches_scipy(first, count, seed):
    # scipy.special.jv (a general-purpose reference library) order by order, at points on
    # both sides of every turning point x = m and at the nodes of the rules that use them
    rng = np.random.default_rng(seed)
    x = np.concatenate([rng.uniform(1e-3, 1000.0, 400),
                        first + rng.uniform(-5.0, count + 5.0, 200).clip(1e-3)])
    table = bessel_j_orders(first, count, x)
    orders = np.arange(first, first + count)
    np.testing.assert_allclose(table, jv(orders[:, None], x[None, :]), rtol=0, atol=5e-14)
    # each value depends on its order and point alone, not on how many orders were asked for
    assert np.array_equal(bessel_j_orders(first, max(1, count // 2), x[:7]),
                          table[:max(1, count // 2), :7])
