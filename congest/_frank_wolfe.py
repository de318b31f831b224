"""Link-based methods: successive averages and the Frank-Wolfe family.

One loop; the methods differ only in how they turn the all-or-nothing point ``y`` into a
search direction and in the step along it.

* ``msa``: method of successive averages, step ``1 / k`` towards ``y``.
* ``fw``: Frank-Wolfe (1956) with exact line search, as applied to traffic assignment by
  LeBlanc, Morlok & Pierskalla (1975).
* ``cfw``, ``bfw``: conjugate and bi-conjugate Frank-Wolfe (Mitradjieva & Lindberg 2013):
  the target point is a combination of ``y`` and earlier targets chosen to be conjugate
  to earlier directions with respect to the (diagonal) Hessian.

References
----------
.. [1] Frank, M. & Wolfe, P. (1956). An algorithm for quadratic programming. Naval
   Research Logistics Quarterly 3, 95-110.
.. [2] LeBlanc, L.J., Morlok, E.K. & Pierskalla, W.P. (1975). An efficient approach to
   solving the road network equilibrium traffic assignment problem. Transportation
   Research 9, 309-318.
.. [3] Mitradjieva, M. & Lindberg, P.O. (2013). The stiff is moving -- conjugate
   direction Frank-Wolfe methods with applications to traffic assignment.
   Transportation Science 47(2), 280-293.
"""

from __future__ import annotations

import time

import numpy as np
from scipy.optimize import brentq

from .equilibrium import relative_gap
from .exceptions import SolverError

__all__ = ["solve_msa", "solve_fw", "solve_cfw", "solve_bfw"]

_DELTA = 1e-6  # keeps conjugate weights away from 1 (Mitradjieva & Lindberg 2013)


def _line_search(problem, x, d):
    """Exact step in [0, 1] minimising the objective along ``d`` (root of d . c(x + s d))."""

    def slope(s):
        return float(d @ problem.gradient(x + s * d))

    if slope(1.0) <= 0.0:
        return 1.0
    if slope(0.0) >= 0.0:
        return 0.0
    return brentq(slope, 0.0, 1.0, xtol=1e-15, rtol=1e-15, maxiter=200)


class _Direction:
    """Turns the all-or-nothing point into a target point; FW returns it unchanged."""

    def __init__(self, kind):
        self.kind = kind
        self.s1 = None  # previous target point
        self.s2 = None  # target point before that
        self.last_step = None

    def target(self, problem, x, y):
        if self.kind == "fw" or self.s1 is None or self.last_step in (None, 0.0, 1.0):
            return self._keep(y)
        hess = problem.gradient_derivative(x)
        if self.kind == "cfw" or self.s2 is None:
            d1 = self.s1 - x
            num = d1 @ (hess * (y - x))
            den = d1 @ (hess * (y - self.s1))
            # A weight above 1 - delta has no conjugate point on the segment [y, s1];
            # clipping it to 1 - delta (as in the paper) makes s ~ s1, a direction the
            # last exact line search already exhausted, and the method stalls. Take the
            # plain Frank-Wolfe target instead.
            if den != 0.0 and 0.0 <= num / den <= 1.0 - _DELTA:
                a = num / den
            else:
                a = 0.0
            return self._keep(a * self.s1 + (1.0 - a) * y)
        tau = self.last_step
        d1 = self.s1 - x
        d2 = tau * self.s1 - x + (1.0 - tau) * self.s2
        den_mu = d2 @ (hess * (self.s2 - self.s1))
        mu = -(d2 @ (hess * (y - x))) / den_mu if den_mu != 0.0 else 0.0
        den_nu = d1 @ (hess * d1)
        nu = -(d1 @ (hess * (y - x))) / den_nu if den_nu != 0.0 else 0.0
        nu += mu * tau / (1.0 - tau)
        mu, nu = max(0.0, mu), max(0.0, nu)
        b0 = 1.0 / (1.0 + mu + nu)
        return self._keep(b0 * y + nu * b0 * self.s1 + mu * b0 * self.s2)

    def _keep(self, s):
        self.s2, self.s1 = self.s1, s
        return s

    def reset(self):
        self.s1 = self.s2 = None


def _run(problem, kind, *, tol, max_iter, time_limit, warm_start, callback):
    net = problem.network
    if max_iter is None:
        max_iter = 10_000 if kind == "msa" else 2_000
    if max_iter < 1:
        raise SolverError(f"max_iter must be at least 1, got {max_iter!r}")
    start = time.perf_counter()
    if warm_start is not None:
        if warm_start.network.demand.shape != net.demand.shape or not np.array_equal(
            warm_start.network.demand, net.demand
        ):
            raise SolverError(
                "a Frank-Wolfe warm start needs the same demand; use a path- or bush-based "
                "method to warm-start after a demand change")
        x = np.array(warm_start.flow, dtype=np.float64)
    else:
        x, _, _ = problem.all_or_nothing(problem.gradient(np.zeros(net.n_links)))
    history = {"iteration": [], "relative_gap": [], "objective": [], "wall_time": []}
    direction = _Direction(kind)
    best = (np.inf, x.copy())
    converged = False
    message = ""
    k = 0
    for k in range(1, max_iter + 1):
        grad = problem.gradient(x)
        y, sptt, _ = problem.all_or_nothing(grad)
        tstt = float(x @ grad)
        gap = relative_gap(tstt, sptt)
        elapsed = time.perf_counter() - start
        history["iteration"].append(k)
        history["relative_gap"].append(gap)
        history["objective"].append(problem.objective_value(x))
        history["wall_time"].append(elapsed)
        if gap < best[0]:
            best = (gap, x.copy())
        if gap <= tol:
            converged = True
            break
        if callback is not None and callback(k, x, gap):
            message = f"stopped by callback at relative gap {gap:.3g}"
            break
        if time_limit is not None and elapsed > time_limit:
            message = f"time limit {time_limit:g} s reached at relative gap {gap:.3g}"
            break
        if kind == "msa":
            x = x + (y - x) / (k + 1)
            continue
        s = direction.target(problem, x, y)
        d = s - x
        if float(d @ grad) >= 0.0 and kind != "fw":
            # not a descent direction: fall back to the plain Frank-Wolfe step
            direction.reset()
            s = direction.target(problem, x, y)
            d = s - x
        step = _line_search(problem, x, d)
        direction.last_step = step
        x = x + step * d
    else:
        message = f"iteration cap {max_iter} reached at relative gap {best[0]:.3g}"
    flow = x if converged else best[1]
    return {
        "flow": flow,
        "iterations": k,
        "converged": converged,
        "message": message,
        "history": history,
    }


def solve_msa(problem, **kw):
    """Method of successive averages (step 1/k)."""
    return _run(problem, "msa", **kw)


def solve_fw(problem, **kw):
    """Frank-Wolfe with exact line search."""
    return _run(problem, "fw", **kw)


def solve_cfw(problem, **kw):
    """Conjugate Frank-Wolfe (Mitradjieva & Lindberg 2013)."""
    return _run(problem, "cfw", **kw)


def solve_bfw(problem, **kw):
    """Bi-conjugate Frank-Wolfe (Mitradjieva & Lindberg 2013)."""
    return _run(problem, "bfw", **kw)
