"""Link cost (volume-delay) functions: cost, derivative, integral and marginal cost.

Three kinds, chosen per link by ``Network.cost_kind``; ``x = v / c`` with ``c`` the
capacity for the analysis period and ``t0`` the free-flow time:

* ``0`` BPR (Bureau of Public Roads 1964): ``t = t0 * (1 + alpha * x**beta)``.
* ``1`` conical (Spiess 1990): ``t = t0 * (2 + sqrt(a**2 (1-x)**2 + b**2) - a (1-x) - b)``
  with ``a = alpha > 1`` and ``b = (2a - 1) / (2a - 2)``; ``t(0) = t0``, ``t(c) = 2 t0``.
* ``2`` polynomial: ``t = t0 + alpha * x**beta``; with ``c = 1`` this is the textbook
  ``a + b v**p`` used for Pigou and Braess examples.

The generalized cost of a link adds the flow-independent ``Network.constant_cost``
(fixed cost plus tolls in minutes). All functions are vectorised, exact at ``v = 0``
including ``alpha = 0`` or ``beta = 0`` (no ``0 * inf``), and the scalar kernels are
compiled with numba so solver inner loops can call them.

References
----------
.. [1] Bureau of Public Roads (1964). Traffic Assignment Manual. US Dept. of Commerce.
.. [2] Spiess, H. (1990). Conical volume-delay functions. Transportation Science 24(2),
   153-158.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba
import numpy as np

__all__ = ["CostModel"]

BPR, CONICAL, POLYNOMIAL = 0, 1, 2


@numba.njit(cache=True, inline="always")
def _power(x, p):
    # x ** p with x >= 0 and the convention 0 ** 0 = 1
    if p == 0.0:
        return 1.0
    if x <= 0.0:
        return 0.0 if p > 0.0 else math.inf
    return x**p


@numba.njit(cache=True)
def time_scalar(kind, t0, a, b, c, v):
    """Travel time of one link at volume ``v`` (no constant term)."""
    if kind == BPR:
        if a == 0.0:
            return t0
        return t0 * (1.0 + a * _power(v / c, b))
    if kind == POLYNOMIAL:
        if a == 0.0:
            return t0
        return t0 + a * _power(v / c, b)
    g = (2.0 * a - 1.0) / (2.0 * a - 2.0)
    w = 1.0 - v / c
    return t0 * (2.0 + math.sqrt(a * a * w * w + g * g) - a * w - g)


@numba.njit(cache=True)
def derivative_scalar(kind, t0, a, b, c, v):
    """d t / d v of one link at volume ``v``."""
    if kind == CONICAL:
        g = (2.0 * a - 1.0) / (2.0 * a - 2.0)
        w = 1.0 - v / c
        return t0 / c * (a - a * a * w / math.sqrt(a * a * w * w + g * g))
    if a == 0.0 or b == 0.0:
        return 0.0
    scale = t0 * a if kind == BPR else a
    return scale * b * _power(v / c, b - 1.0) / c


@numba.njit(cache=True)
def second_derivative_scalar(kind, t0, a, b, c, v):
    """d^2 t / d v^2 of one link at volume ``v`` (inf at ``v = 0`` when 1 < beta < 2).

    System-optimum solvers need it: the marginal cost ``t + w t'`` has derivative
    ``2 t' + w t''``.
    """
    if kind == CONICAL:
        g = (2.0 * a - 1.0) / (2.0 * a - 2.0)
        w = 1.0 - v / c
        r = a * a * w * w + g * g
        return t0 * a * a * g * g / (c * c * r * math.sqrt(r))
    if a == 0.0 or b == 0.0 or b == 1.0:
        return 0.0
    scale = t0 * a if kind == BPR else a
    return scale * b * (b - 1.0) * _power(v / c, b - 2.0) / (c * c)


@numba.njit(cache=True)
def time_derivatives_scalar(kind, t0, a, b, c, v):
    """``(t, t', t'')`` of one link at volume ``v`` with a single power evaluation.

    Equal to :func:`time_scalar`, :func:`derivative_scalar` and
    :func:`second_derivative_scalar` up to rounding; solver inner loops that update a
    link after every flow move call this instead of the three.
    """
    if kind == CONICAL:
        g = (2.0 * a - 1.0) / (2.0 * a - 2.0)
        w = 1.0 - v / c
        r = a * a * w * w + g * g
        s = math.sqrt(r)
        return (t0 * (2.0 + s - a * w - g), t0 / c * (a - a * a * w / s),
                t0 * a * a * g * g / (c * c * r * s))
    if a == 0.0:
        return t0, 0.0, 0.0
    if b == 0.0:
        return (t0 * (1.0 + a) if kind == BPR else t0 + a), 0.0, 0.0
    x = v / c
    if b == 4.0:
        xb = x * x
        xb *= xb
    elif b == 1.0:
        xb = x
    elif b == 2.0:
        xb = x * x
    else:
        xb = _power(x, b)
    scale = t0 * a if kind == BPR else a
    t = t0 + scale * xb
    if v > 0.0:
        d = scale * b * xb / v
        return t, d, d * (b - 1.0) / v
    # v == 0: limits of b x**(b-1) / c and b (b-1) x**(b-2) / c**2
    if b == 1.0:
        return t, scale / c, 0.0
    if b < 1.0:
        return t, math.inf, -math.inf
    dd = 2.0 * scale / (c * c) if b == 2.0 else (0.0 if b > 2.0 else math.inf)
    return t, 0.0, dd


@numba.njit(cache=True)
def integral_scalar(kind, t0, a, b, c, v):
    """Integral of the travel time from 0 to ``v`` (Beckmann term)."""
    if kind == CONICAL:
        g = (2.0 * a - 1.0) / (2.0 * a - 2.0)
        x = v / c

        def prim(w):
            r = math.sqrt(w * w + g * g)
            return -(w * r + g * g * math.asinh(w / g)) / (2.0 * a)

        lin = 2.0 * x - a * (x - 0.5 * x * x) - g * x
        return t0 * c * (lin + prim(a * (1.0 - x)) - prim(a))
    if a == 0.0:
        return t0 * v
    tail = a * c * _power(v / c, b + 1.0) / (b + 1.0)
    if kind == BPR:
        return t0 * (v + tail)
    return t0 * v + tail


@numba.njit(cache=True)
def _fill(which, kind, t0, a, b, c, v, out):
    for i in range(v.size):
        if which == 0:
            out[i] = time_scalar(kind[i], t0[i], a[i], b[i], c[i], v[i])
        elif which == 1:
            out[i] = derivative_scalar(kind[i], t0[i], a[i], b[i], c[i], v[i])
        elif which == 3:
            out[i] = second_derivative_scalar(kind[i], t0[i], a[i], b[i], c[i], v[i])
        else:
            out[i] = integral_scalar(kind[i], t0[i], a[i], b[i], c[i], v[i])
    return out


@dataclass(frozen=True, eq=False)
class CostModel:
    """The cost functions of a network's links, as contiguous arrays.

    Build it once per network with :meth:`from_network`; every method takes link
    volumes of shape ``(n_links,)`` and returns an array of the same shape.

    Examples
    --------
    >>> import numpy as np
    >>> from congest.costs import CostModel
    >>> m = CostModel(kind=np.array([0], np.int8), t0=np.array([10.0]),
    ...               alpha=np.array([0.15]), beta=np.array([4.0]),
    ...               capacity=np.array([100.0]), constant=np.array([0.0]))
    >>> float(m.time(np.array([100.0]))[0])
    11.5
    """

    kind: np.ndarray
    t0: np.ndarray
    alpha: np.ndarray
    beta: np.ndarray
    capacity: np.ndarray
    constant: np.ndarray
    preload: np.ndarray = None

    def __post_init__(self):
        if self.preload is None:
            object.__setattr__(self, "preload", np.zeros_like(self.t0))

    @classmethod
    def from_network(cls, network, preload=None) -> CostModel:
        """Cost model of ``network`` (period capacity, constant generalized cost).

        ``preload`` (shape (n_links,)) is a fixed volume already on each link, such as
        drivers on routes given to them; every function is then evaluated at the total
        volume ``v + preload``.
        """
        cap = np.where(network.capacity > 0, network.period_capacity, 1.0)
        return cls(
            kind=np.ascontiguousarray(network.cost_kind, dtype=np.int8),
            t0=np.ascontiguousarray(network.free_flow_time, dtype=np.float64),
            alpha=np.ascontiguousarray(network.alpha, dtype=np.float64),
            beta=np.ascontiguousarray(network.beta, dtype=np.float64),
            capacity=np.ascontiguousarray(cap, dtype=np.float64),
            constant=np.ascontiguousarray(network.constant_cost, dtype=np.float64),
            preload=None if preload is None else np.ascontiguousarray(preload, np.float64),
        )

    def with_constant(self, constant) -> CostModel:
        """The same functions with another constant term (e.g. added tolls)."""
        return CostModel(self.kind, self.t0, self.alpha, self.beta, self.capacity,
                         np.ascontiguousarray(constant, dtype=np.float64), self.preload)

    def _apply(self, which, v):
        v = np.ascontiguousarray(v, dtype=np.float64) + self.preload
        out = np.empty_like(v)
        return _fill(which, self.kind, self.t0, self.alpha, self.beta, self.capacity, v, out)

    def time(self, v):
        """Travel time ``t(v + preload)``, minutes, without the constant term."""
        return self._apply(0, v)

    def derivative(self, v):
        """``t'(v + preload)``, minutes per vehicle."""
        return self._apply(1, v)

    def second_derivative(self, v):
        """``t''(v + preload)``."""
        return self._apply(3, v)

    def integral(self, v):
        """``integral_0^v t(u + preload) du`` (without the constant term)."""
        base = _fill(2, self.kind, self.t0, self.alpha, self.beta, self.capacity,
                     self.preload, np.empty_like(self.preload)) if self.preload.any() else 0.0
        return self._apply(2, v) - base

    def cost(self, v):
        """Generalized cost ``t(v + preload) + constant``."""
        return self.time(v) + self.constant

    def marginal(self, v):
        """Marginal social cost ``t(w) + w t'(w) + constant`` at ``w = v + preload``."""
        w = np.asarray(v, dtype=np.float64) + self.preload
        return self.time(v) + w * self.derivative(v) + self.constant

    def beckmann(self, v) -> float:
        """Beckmann objective ``sum_a integral_0^{v_a} c_a(u + preload_a) du``."""
        v = np.asarray(v, dtype=np.float64)
        return float(self.integral(v).sum() + self.constant @ v)

    def total_cost(self, v) -> float:
        """Total generalized cost of all volume, ``sum_a w_a c_a(w_a)``, ``w = v + preload``."""
        w = np.asarray(v, dtype=np.float64) + self.preload
        return float(w @ self.cost(v))
