"""Link cost functions against their defining formulas, calculus and scipy quadrature.

Sources: BPR function t = t0 (1 + alpha (v/c)**beta) (Bureau of Public Roads 1964,
Traffic Assignment Manual); conical function (Spiess 1990, Transportation Science 24(2),
153-158: f(0) = 1, f(1) = 2, f'(1) = alpha, increasing and convex; equation and
property numbering not cited, from memory).
Derivatives are checked against central finite differences and integrals against
``scipy.integrate.quad`` (general-purpose numerical routines, not project code).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy.integrate import quad

from congest.costs import CostModel, derivative_scalar, integral_scalar, time_scalar
from congest.network import Network

BPR, CONICAL, POLY = 0, 1, 2


def _model(kind, t0, alpha, beta, cap, constant=0.0, preload=None):
    n = np.broadcast(np.atleast_1d(t0), np.atleast_1d(alpha), np.atleast_1d(beta)).shape[0]

    def arr(x):
        return np.ascontiguousarray(np.broadcast_to(np.asarray(x, float), (n,)))

    return CostModel(kind=np.ascontiguousarray(np.broadcast_to(np.int8(kind), (n,))),
                     t0=arr(t0), alpha=arr(alpha), beta=arr(beta), capacity=arr(cap),
                     constant=arr(constant), preload=None if preload is None else arr(preload))


def _random_links(rng, n=40):
    kind = rng.integers(0, 3, n).astype(np.int8)
    t0 = rng.uniform(0.5, 20.0, n)
    alpha = np.where(kind == CONICAL, rng.uniform(1.5, 8.0, n), rng.uniform(0.05, 2.0, n))
    beta = rng.choice([1.0, 2.0, 4.0, 4.5, 6.0], n)
    cap = rng.uniform(50.0, 3000.0, n)
    return kind, t0, alpha, beta, cap


def _reference_time(kind, t0, a, b, c, v):
    # The defining formulas, written out independently of congest.costs.
    x = v / c
    if kind == BPR:
        return t0 * (1.0 + a * x**b)
    if kind == POLY:
        return t0 + a * x**b
    g = (2 * a - 1) / (2 * a - 2)  # Spiess 1990: beta = (2 alpha - 1)/(2 alpha - 2)
    return t0 * (2 + math.sqrt(a**2 * (1 - x) ** 2 + g**2) - a * (1 - x) - g)


def test_time_matches_defining_formulas():
    # BPR 1964; Spiess 1990; polynomial t0 + alpha (v/c)**beta.
    rng = np.random.default_rng(0)
    kind, t0, alpha, beta, cap = _random_links(rng)
    v = rng.uniform(0.0, 2.5, kind.size) * cap
    model = CostModel(kind=kind, t0=t0, alpha=alpha, beta=beta, capacity=cap,
                      constant=np.zeros(kind.size))
    expected = [_reference_time(*args) for args in zip(kind, t0, alpha, beta, cap, v, strict=True)]
    assert_allclose(model.time(v), expected, rtol=1e-13)


def test_bpr_standard_values():
    # BPR 1964 with its standard alpha = 0.15, beta = 4: at capacity t = 1.15 t0;
    # at half capacity t = t0 (1 + 0.15/16).
    m = _model(BPR, 10.0, 0.15, 4.0, 1000.0)
    assert_allclose(m.time(np.array([1000.0])), [11.5], rtol=1e-15)
    assert_allclose(m.time(np.array([500.0])), [10.0 * (1 + 0.15 / 16)], rtol=1e-15)
    assert_allclose(m.time(np.array([0.0])), [10.0], rtol=0)


@pytest.mark.parametrize("alpha", [1.5, 4.0, 10.0])
def test_conical_properties(alpha):
    # Spiess 1990 (from memory): f(0) = 1 (free flow), f(1) = 2 (twice free flow at capacity),
    # f'(1) = alpha (steepness at capacity); f is increasing and convex.
    t0, c = 7.0, 1800.0
    m = _model(CONICAL, t0, alpha, 0.0, c)
    assert_allclose(m.time(np.array([0.0])), [t0], rtol=1e-13)
    assert_allclose(m.time(np.array([c])), [2 * t0], rtol=1e-13)
    assert_allclose(m.derivative(np.array([c])), [t0 * alpha / c], rtol=1e-12)
    v = np.linspace(0.0, 3 * c, 301)
    t = _model(CONICAL, np.full(v.size, t0), alpha, 0.0, c).time(v)
    assert np.all(np.diff(t) > 0)
    assert np.all(np.diff(t, 2) > -1e-12)


@pytest.mark.parametrize("seed", range(3))
def test_derivative_matches_finite_differences(seed):
    # Central difference (f(v+h) - f(v-h)) / 2h, error O(h**2) (common practice).
    rng = np.random.default_rng(seed)
    kind, t0, alpha, beta, cap = _random_links(rng)
    v = rng.uniform(0.05, 2.5, kind.size) * cap
    model = CostModel(kind=kind, t0=t0, alpha=alpha, beta=beta, capacity=cap,
                      constant=np.zeros(kind.size))
    h = 1e-5 * cap
    fd = (model.time(v + h) - model.time(v - h)) / (2 * h)
    assert_allclose(model.derivative(v), fd, rtol=1e-6, atol=1e-12)


@pytest.mark.parametrize("seed", range(3))
def test_integral_matches_quadrature(seed):
    # Beckmann term integral_0^v t(u) du against scipy.integrate.quad.
    rng = np.random.default_rng(seed)
    kind, t0, alpha, beta, cap = _random_links(rng)
    v = rng.uniform(0.0, 2.5, kind.size) * cap
    model = CostModel(kind=kind, t0=t0, alpha=alpha, beta=beta, capacity=cap,
                      constant=np.zeros(kind.size))
    expected = [quad(lambda u, args=args: _reference_time(*args, u), 0.0, vi,
                     epsabs=0, epsrel=1e-12)[0]
                for args, vi in zip(zip(kind, t0, alpha, beta, cap, strict=True), v, strict=True)]
    assert_allclose(model.integral(v), expected, rtol=1e-10)


def test_marginal_cost_is_derivative_of_total_cost():
    # Marginal social cost d/dv [v t(v)] = t + v t' (Beckmann, McGuire & Winsten 1956),
    # checked against a central difference of v t(v), plus the constant term.
    rng = np.random.default_rng(5)
    kind, t0, alpha, beta, cap = _random_links(rng)
    const = rng.uniform(0, 3, kind.size)
    model = CostModel(kind=kind, t0=t0, alpha=alpha, beta=beta, capacity=cap, constant=const)
    v = rng.uniform(0.05, 2.0, kind.size) * cap
    h = 1e-5 * cap
    total = CostModel(kind=kind, t0=t0, alpha=alpha, beta=beta, capacity=cap,
                      constant=np.zeros(kind.size))

    def vt(w):
        return w * total.time(w)

    fd = (vt(v + h) - vt(v - h)) / (2 * h) + const
    assert_allclose(model.marginal(v), fd, rtol=1e-6)
    assert_allclose(model.cost(v), model.time(v) + const, rtol=1e-15)


@pytest.mark.parametrize("kind", [BPR, POLY])
@pytest.mark.parametrize("alpha,beta", [(0.0, 4.0), (0.15, 0.0), (0.0, 0.0), (1.0, 1.0)])
def test_zero_volume_and_degenerate_parameters(kind, alpha, beta):
    # At v = 0 with alpha = 0 or beta = 0 every function is finite (0**0 = 1 by the
    # convention of constant-cost links; Barcelona's connectors have alpha = beta = 0).
    t0, c = 3.0, 100.0
    m = _model(kind, t0, alpha, beta, c)
    v = np.array([0.0])
    for f in (m.time, m.derivative, m.integral, m.cost, m.marginal):
        assert np.isfinite(f(v)).all()
    # values from the formulas with x**0 = 1:
    x0 = 1.0 if beta == 0.0 else 0.0
    expected_t = t0 * (1 + alpha * x0) if kind == BPR else t0 + alpha * x0
    assert_allclose(m.time(v), [expected_t], rtol=1e-15)
    assert_allclose(m.integral(v), [0.0], atol=0)
    slope = 0.0 if (alpha == 0.0 or beta != 1.0) else (t0 if kind == BPR else 1.0) / c
    assert_allclose(m.derivative(v), [slope], rtol=1e-15)
    assert_allclose(m.marginal(v), [expected_t], rtol=1e-15)
    # beta = 0 makes the cost constant: the integral is linear in v.
    if beta == 0.0:
        assert_allclose(m.integral(np.array([7.0])), [7.0 * expected_t], rtol=1e-14)


def test_scalar_kernels_agree_with_vectorised():
    rng = np.random.default_rng(9)
    kind, t0, alpha, beta, cap = _random_links(rng, 10)
    v = rng.uniform(0, 2, 10) * cap
    model = CostModel(kind=kind, t0=t0, alpha=alpha, beta=beta, capacity=cap,
                      constant=np.zeros(10))
    for f_vec, f_sc in ((model.time, time_scalar), (model.derivative, derivative_scalar),
                        (model.integral, integral_scalar)):
        vals = [f_sc(k, a, b, c, d, e) for k, a, b, c, d, e in zip(kind, t0, alpha, beta,
                                                                     cap, v, strict=True)]
        assert_allclose(f_vec(v), vals, rtol=1e-15)


def test_preload_semantics():
    # A preload p is volume already on the link: t(v) -> t(v + p), the Beckmann term is
    # integral_0^v t(u + p) du, and total cost counts the preloaded vehicles too.
    rng = np.random.default_rng(11)
    kind, t0, alpha, beta, cap = _random_links(rng, 12)
    p = rng.uniform(0, 1, 12) * cap
    const = rng.uniform(0, 2, 12)
    base = CostModel(kind=kind, t0=t0, alpha=alpha, beta=beta, capacity=cap, constant=const)
    pre = CostModel(kind=kind, t0=t0, alpha=alpha, beta=beta, capacity=cap, constant=const,
                    preload=p)
    v = rng.uniform(0, 1.5, 12) * cap
    assert_allclose(pre.time(v), base.time(v + p), rtol=1e-15)
    assert_allclose(pre.derivative(v), base.derivative(v + p), rtol=1e-15)
    assert_allclose(pre.cost(v), base.cost(v + p), rtol=1e-15)
    assert_allclose(pre.marginal(v), base.marginal(v + p), rtol=1e-14)
    expected = [quad(lambda u, args=args, pi=pi: _reference_time(*args, u + pi), 0.0, vi,
                     epsabs=0, epsrel=1e-12)[0]
                for args, pi, vi in zip(zip(kind, t0, alpha, beta, cap, strict=True), p, v,
                                        strict=True)]
    assert_allclose(pre.integral(v), expected, rtol=1e-9)
    assert_allclose(pre.beckmann(v), np.sum(expected) + const @ v, rtol=1e-9)
    assert_allclose(pre.total_cost(v), (v + p) @ base.cost(v + p), rtol=1e-14)
    assert_allclose(pre.integral(np.zeros(12)), 0.0, atol=1e-9)


def test_from_network_uses_period_capacity_and_constant_cost():
    # Capacity is per hour; a 2-hour period doubles it. Generalized cost adds the
    # fixed cost and the money toll converted at the value of time (common practice).
    net = Network(node_ids=[1, 2], tail=[0], head=[1], capacity=[1000.0],
                  free_flow_time=[10.0], alpha=0.15, beta=4.0, fixed_cost=[1.5], toll=[2.0],
                  value_of_time=30.0, period_hours=2.0, zone_ids=[1, 2], zone_nodes=[0, 1],
                  demand=[[0, 1], [0, 0]])
    m = CostModel.from_network(net)
    assert_allclose(m.time(np.array([2000.0])), [11.5], rtol=1e-15)
    assert_allclose(m.cost(np.array([0.0])), [10.0 + 1.5 + 2.0 * 60 / 30], rtol=1e-15)
    beck = m.beckmann(np.array([2000.0]))
    assert_allclose(beck, 10 * 2000 * (1 + 0.15 / 5) + (1.5 + 4.0) * 2000, rtol=1e-14)
