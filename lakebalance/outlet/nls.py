"""A generic nonlinear least-squares engine: a residual function and its Jacobian in, estimates
with standard errors and covariance out.

The rating fit (:mod:`lakebalance.outlet.fit`) is built on it, and the engine is checked on its own
against the certified values of the NIST StRD nonlinear regression problems.

Notes
-----
The estimate minimises :math:`S(\\theta) = \\sum_i r_i(\\theta)^2` with
:func:`scipy.optimize.least_squares`. With :math:`J` the Jacobian of the residuals at the
optimum, :math:`n` observations and :math:`p` free parameters, the covariance is the standard
nonlinear-regression one (Bates & Watts, 1988, eq. 2.26; the definition NIST certifies):

.. math:: \\hat\\sigma^2 = S(\\hat\\theta)/(n - p), \\qquad
          \\operatorname{cov}(\\hat\\theta) = \\hat\\sigma^2 (J^T J)^{-1}

computed from the singular value decomposition of :math:`J` for numerical stability.

References
----------
Bates, D. M. and Watts, D. G. (1988). Nonlinear Regression Analysis and Its Applications. Wiley.
Moré, J. J. (1978). The Levenberg-Marquardt algorithm: implementation and theory. In: Watson,
G. A. (ed.), Numerical Analysis (LNM 630), Springer, 105-116.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np

from ..errors import FitError

__all__ = [
    "LeastSquaresResult",
    "solve_least_squares",
    "fit_curve",
    "complex_step_jacobian",
    "covariance_from_jacobian",
]

Method = Literal["auto", "lm", "trf", "dogbox"]
Array = np.ndarray


@dataclass(frozen=True)
class LeastSquaresResult:
    """The outcome of :func:`solve_least_squares` (free parameters only).

    Attributes
    ----------
    params : ndarray (p,)
        Estimates.
    cov : ndarray (p, p)
        Covariance :math:`\\hat\\sigma^2 (J^T J)^{-1}` (NaN where the Jacobian is rank-deficient).
    stderr : ndarray (p,)
        Square roots of the diagonal of ``cov``.
    residuals : ndarray (n,)
        Residuals at the optimum (as returned by the residual function).
    jacobian : ndarray (n, p)
        Jacobian of the residuals at the optimum.
    rss : float
        Residual sum of squares.
    dof : int
        Degrees of freedom ``n - p``.
    sigma : float
        Residual standard deviation ``sqrt(rss / dof)``.
    rank : int
        Numerical rank of the Jacobian.
    method : str
        Which solver gave the kept solution.
    nfev : int
        Residual evaluations over all attempts.
    active : ndarray of bool (p,)
        Parameters that ended on a bound.
    """

    params: Array
    cov: Array
    stderr: Array
    residuals: Array
    jacobian: Array
    rss: float
    dof: int
    sigma: float
    rank: int
    method: str
    nfev: int
    active: Array


def complex_step_jacobian(
    fun: Callable[[Array], Array], params: Array, step: float = 1e-30
) -> Array:
    """Jacobian of ``fun`` at ``params`` by the complex-step derivative.

    Exact to machine precision for functions analytic in their parameters that numpy evaluates
    in complex arithmetic (no ``abs``, ``maximum`` or comparisons on the parameters).

    Notes
    -----
    :math:`\\partial f/\\partial\\theta_j \\approx \\operatorname{Im} f(\\theta + i h e_j) / h`
    (Squire & Trapp, 1998, eq. 5), with no subtractive cancellation, so ``h`` can be tiny.

    References
    ----------
    Squire, W. and Trapp, G. (1998). Using complex variables to estimate derivatives of real
    functions. SIAM Review 40(1), 110-112.
    """
    params = np.asarray(params, dtype=float)
    cols = []
    for j in range(params.size):
        z = params.astype(complex)
        z[j] += 1j * step
        cols.append(np.imag(fun(z)) / step)
    return np.stack(cols, axis=-1)


def covariance_from_jacobian(jac: Array, rss: float, dof: int) -> tuple[Array, int]:
    """Covariance ``rss/dof * (J^T J)^-1`` by SVD, and the numerical rank of ``J``.

    Directions with singular values below ``max(n, p) * eps * s_max`` count as not identified;
    their variances are NaN.
    """
    jac = np.asarray(jac, dtype=float)
    p = jac.shape[1]
    if p == 0:
        return np.zeros((0, 0)), 0
    _, s, vt = np.linalg.svd(jac, full_matrices=False)
    tol = max(jac.shape) * np.finfo(float).eps * (s[0] if s.size else 0.0)
    keep = s > tol
    rank = int(keep.sum())
    sigma2 = rss / dof if dof > 0 else np.nan
    v = vt[keep].T / s[keep]
    cov = sigma2 * (v @ v.T)
    if rank < p:
        # a parameter is unidentified when it loads on a dropped direction
        weak = np.abs(vt[~keep]).max(axis=0) > 1e-8
        cov[weak, :] = np.nan
        cov[:, weak] = np.nan
    return cov, rank


def solve_least_squares(
    residual: Callable[[Array], Array],
    jacobian: Callable[[Array], Array] | Literal["complex", "2-point", "3-point"],
    p0: Sequence[float] | Array,
    *,
    bounds: tuple[Sequence[float], Sequence[float]] | None = None,
    method: Method = "auto",
    tol: float = 1e-15,
    max_nfev: int | None = None,
    n_obs: int | None = None,
) -> LeastSquaresResult:
    """Minimise the sum of squared residuals and report the standard regression statistics.

    Parameters
    ----------
    residual : callable
        ``residual(theta) -> ndarray (n,)``; weights already applied (dimension of the data).
    jacobian : callable or {"complex", "2-point", "3-point"}
        ``jacobian(theta) -> ndarray (n, p)`` of the residuals, or a numerical rule
        (``"complex"``: complex-step, exact for analytic residuals).
    p0 : array_like (p,)
        Starting values (units of each parameter).
    bounds : (lower, upper), optional
        Bounds on each parameter (``-inf``/``inf`` for none).
    method : {"auto", "lm", "trf", "dogbox"}
        ``"auto"`` tries Levenberg-Marquardt (MINPACK) when there are no finite bounds and the
        trust-region reflective method with Jacobian scaling, restarts the best from its own
        optimum, and keeps the lowest sum of squares.
    tol : float
        ``ftol``, ``xtol`` and ``gtol`` of the solver (-).
    max_nfev : int, optional
        Evaluation budget per attempt (default ``1000 * p``: slow, ill-conditioned problems
        need thousands of steps).
    n_obs : int, optional
        Number of observations for the degrees of freedom (default: length of the residuals).

    Returns
    -------
    LeastSquaresResult

    Raises
    ------
    FitError
        When there are fewer observations than parameters or no attempt gives finite residuals.
    """
    from scipy.optimize import least_squares

    p0 = np.asarray(p0, dtype=float)
    k = p0.size
    if bounds is None:
        lo, hi = np.full(k, -np.inf), np.full(k, np.inf)
    else:
        lo, hi = (np.asarray(b, dtype=float) for b in bounds)
    bounded = bool(np.isfinite(lo).any() or np.isfinite(hi).any())
    p0 = np.clip(p0, lo, hi)
    if jacobian == "complex":

        def jac_fun(theta: Array) -> Array:
            return complex_step_jacobian(residual, theta)

    else:
        jac_fun = jacobian  # type: ignore[assignment]

    r0 = np.asarray(residual(p0), dtype=float)
    n = int(n_obs if n_obs is not None else r0.size)
    if n < k:
        raise FitError(f"{n} observations cannot determine {k} parameters")

    if max_nfev is None:
        max_nfev = 1000 * max(k, 1)
    if method == "auto":
        methods = ["trf"] if bounded else ["lm", "trf"]
    else:
        methods = [method]

    best = None
    best_method = ""
    nfev = 0
    for m in methods:
        start = p0
        # each method runs twice: from the start, then again from its own optimum, which
        # polishes the slow final convergence of ill-conditioned problems
        for _attempt in range(2):
            try:
                res = least_squares(
                    residual,
                    start,
                    jac=jac_fun,
                    bounds=(lo, hi) if m != "lm" else (-np.inf, np.inf),
                    method=m,
                    x_scale="jac",
                    ftol=tol,
                    xtol=tol,
                    gtol=tol,
                    max_nfev=max_nfev,
                )
            except (ValueError, np.linalg.LinAlgError, FloatingPointError):
                break
            nfev += int(res.nfev)
            if not np.all(np.isfinite(res.fun)) or not np.all(np.isfinite(res.x)):
                break
            if best is None or res.cost < best.cost:
                best, best_method = res, m
            start = res.x
    if best is None:
        raise FitError("the fit did not reach finite residuals from the starting values")
    theta = best.x
    r = np.asarray(residual(theta), dtype=float)
    jac = np.asarray(jac_fun(theta), dtype=float).reshape(r.size, k)
    rss = float(r @ r)
    dof = n - k
    cov, rank = covariance_from_jacobian(jac, rss, dof)
    with np.errstate(invalid="ignore"):
        stderr = np.sqrt(np.diag(cov))
    span = np.maximum(np.abs(theta), 1.0) * 1e-10
    active = (np.isfinite(lo) & (theta - lo <= span)) | (np.isfinite(hi) & (hi - theta <= span))
    return LeastSquaresResult(
        params=theta,
        cov=cov,
        stderr=stderr,
        residuals=r,
        jacobian=jac,
        rss=rss,
        dof=dof,
        sigma=float(np.sqrt(rss / dof)) if dof > 0 else float("nan"),
        rank=rank,
        method=best_method,
        nfev=nfev,
        active=active,
    )


def fit_curve(
    model: Callable[[Array, Array], Array],
    x: Array,
    y: Array,
    p0: Sequence[float] | Array,
    *,
    jacobian: Callable[[Array, Array], Array] | Literal["complex", "2-point", "3-point"] = (
        "complex"
    ),
    weights: Array | None = None,
    bounds: tuple[Sequence[float], Sequence[float]] | None = None,
    method: Method = "auto",
    tol: float = 1e-15,
) -> LeastSquaresResult:
    """Fit ``y ≈ model(theta, x)`` by (weighted) least squares.

    Parameters
    ----------
    model : callable
        ``model(theta, x) -> ndarray (n,)`` in the units of ``y``.
    x : ndarray (n, ...)
        Predictor values (any units the model expects).
    y : ndarray (n,)
        Responses.
    p0 : array_like (p,)
        Starting values.
    jacobian : callable or {"complex", "2-point", "3-point"}
        ``jacobian(theta, x) -> ndarray (n, p)`` of the model (not of the residuals), or a rule.
    weights : ndarray (n,), optional
        Weights ``w_i`` (inverse variances, -); residuals are ``sqrt(w_i) (y_i - f_i)``.
    bounds, method, tol
        As in :func:`solve_least_squares`.

    Notes
    -----
    :math:`r_i = \\sqrt{w_i}\\,(y_i - f(x_i; \\theta))`, so :math:`\\partial r/\\partial\\theta =
    -\\sqrt{w_i}\\,\\partial f/\\partial\\theta`.
    """
    y = np.asarray(y, dtype=float)
    sw = np.ones_like(y) if weights is None else np.sqrt(np.asarray(weights, dtype=float))

    def residual(theta: Array) -> Array:
        return sw * (y - model(theta, x))

    if callable(jacobian):

        def jac(theta: Array) -> Array:
            return -sw[:, None] * np.asarray(jacobian(theta, x))

        return solve_least_squares(residual, jac, p0, bounds=bounds, method=method, tol=tol)
    return solve_least_squares(residual, jacobian, p0, bounds=bounds, method=method, tol=tol)
