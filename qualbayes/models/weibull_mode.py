"""The posterior mode of the Weibull model on (log shape, log H(t_ref)) with its Laplace
covariance (preconditions the sampler), and the reported mode on (log shape, log scale)
(scipy BFGS polished by Newton steps on finite differences; no jax)."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from qualbayes.models.weibull_density import data_arrays, log_posterior, log_scale
from qualbayes.models.weibull_prior import LifePrior
from qualbayes.models.weibull_stats import GroupStats


@dataclass
class Mode:
    """Posterior mode in (log shape, log H(t_ref)) and the Laplace covariance there."""

    b: float
    u: float
    cov: np.ndarray
    converged: bool

    def chol(self) -> np.ndarray:
        return np.linalg.cholesky(self.cov)


def posterior_mode(st: GroupStats, prior: LifePrior) -> Mode:
    """Mode of the posterior density on the sampled scale (b, u) and the Laplace
    covariance there (scipy BFGS, polished by Newton steps on a finite-difference
    Hessian). This mode preconditions the sampler; see :func:`reported_mode` for the mode
    that is reported."""
    data = data_arrays(st)

    def nlp(x):
        with np.errstate(over="ignore", invalid="ignore"):  # probes far out: inf is handled
            v = log_posterior(x[0], x[1], st, prior, data)
        return -float(v) if np.isfinite(v) else 1e300

    b0 = prior.shape[0] if prior.shape is not None else 0.0
    starts = [np.array([b0, _u_start(st, math.exp(b0))]),
              np.array([0.5, _u_start(st, math.exp(0.5))])]
    x, h, converged = _maximise(nlp, starts)
    try:
        cov = np.linalg.inv(h)
        np.linalg.cholesky(cov)
    except np.linalg.LinAlgError:
        cov = np.diag([0.25, 1.0])
        converged = False
    if not np.all(np.isfinite(cov)):
        cov = np.diag([0.25, 1.0])
        converged = False
    return Mode(float(x[0]), float(x[1]), cov, converged)


def reported_mode(st: GroupStats, prior: LifePrior, start: Mode | None = None
                  ) -> tuple[float, float]:
    """(shape, scale) at the mode of the posterior density on (log shape, log scale).

    A density's mode depends on the coordinates; on (log beta, log eta) the density is the
    one on (b, u) times the Jacobian beta, so with flat priors on log shape and log scale
    this mode is the maximum-likelihood point.
    """
    data = data_arrays(st)

    def nlp(x):
        b, log_eta = x
        with np.errstate(over="ignore", invalid="ignore"):  # probes far out: inf is handled
            u = math.exp(b) * (st.log_tref - log_eta) if b < 700 else math.inf
            v = log_posterior(b, u, st, prior, data) + b
        return -float(v) if np.isfinite(v) else 1e300

    start = start or posterior_mode(st, prior)
    x0 = np.array([start.b, float(log_scale(start.b, start.u, st.log_tref))])
    x, _, _ = _maximise(nlp, [x0])
    return math.exp(x[0]), math.exp(x[1])


def _maximise(nlp, starts):
    from scipy import optimize  # noqa: PLC0415

    best = None
    for x0 in starts:
        res = optimize.minimize(nlp, x0, method="BFGS", options={"gtol": 1e-9, "maxiter": 500})
        if best is None or res.fun < best.fun:
            best = res
    x = best.x.copy()
    converged = bool(np.isfinite(best.fun) and best.fun < 1e299)
    h = _hessian(nlp, x)
    for _ in range(3):  # Newton polish: the mode tests compare to 1e-5
        g = _gradient(nlp, x)
        try:
            step = np.linalg.solve(h, g)
        except np.linalg.LinAlgError:
            break
        if not np.all(np.isfinite(step)) or np.max(np.abs(step)) > 0.5:
            break
        if nlp(x - step) <= nlp(x) + 1e-12:
            x = x - step
        h = _hessian(nlp, x)
    return x, h, converged


def _u_start(st: GroupStats, beta: float) -> float:
    """log H(t_ref) maximising the exact/right-censored likelihood at this shape."""
    expo = float(np.sum(st.w_exposed * np.exp(beta * st.d_exposed)))
    expo += float(np.sum(st.w_int * np.exp(beta * st.d_int_a)))
    events = max(st.failures, 1)
    if expo <= 0:
        return 0.0
    return float(np.log(events / expo))


def _gradient(f, x, h=1e-5):
    g = np.zeros(2)
    for i in range(2):
        e = np.zeros(2)
        e[i] = h
        g[i] = (f(x + e) - f(x - e)) / (2 * h)
    return g


def _hessian(f, x, h=1e-4):
    hess = np.zeros((2, 2))
    f0 = f(x)
    for i in range(2):
        ei = np.zeros(2)
        ei[i] = h
        hess[i, i] = (f(x + ei) - 2 * f0 + f(x - ei)) / h**2
    e0, e1 = np.array([h, 0.0]), np.array([0.0, h])
    hess[0, 1] = hess[1, 0] = (f(x + e0 + e1) - f(x + e0 - e1) - f(x - e0 + e1)
                               + f(x - e0 - e1)) / (4 * h * h)
    return hess
