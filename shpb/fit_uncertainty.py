"""Honest uncertainties of fitted parameters: a bootstrap over whole curves.

The least-squares standard errors of a global fit treat the residuals of
neighbouring grid points as independent. They are not: a bar test's curve
carries errors that last along the whole curve (a shot's stress scale, from
its gauges, bar modulus and specimen area) and errors correlated over a
stretch of strain (wave oscillations, model misfit). The standard errors then
shrink as 1/√(points), i.e. with the grid step, and understate the real error
several times.

Here the uncertainty comes from a two-level residual bootstrap (Efron &
Tibshirani 1993; Davison & Hinkley 1997, §3.8 on hierarchical data):

1. **Shot level.** Each curve's residual is split into its relative offset
   δ_j (the least-squares scale error of the whole curve, r ≈ δ_j·model) and
   what is left, e_j. Each bootstrap curve gets an offset drawn with
   replacement from the curves' offsets, after centring and inflating them by
   what the fit itself absorbed (:func:`offset_inflation`): a resampling of
   whole shots' errors that keeps every rate and temperature level in every
   draw (resampling the shots themselves, with one or two shots per
   condition, would drop levels or shrink the spread by (n−1)/n).
2. **Within a curve.** e_j is resampled by circular blocks (Künsch 1989;
   Politis & Romano 1992) whose length in plastic strain is twice the
   residuals' correlation length (:func:`correlation_length`), so that
   correlated stretches stay together. The blocks are laid out in strain and
   drawn from common random numbers (:func:`circular_block_indices`): on a
   grid 10× finer a draw resamples the same stretches of the same curves, so
   the intervals do not depend on the grid step (with the grid's quadrature
   weights, :func:`shpb.fit.resample_curves`).

Each draw y* = model(θ̂) + δ*·model(θ̂) + e* is refitted from θ̂ by a
Levenberg–Marquardt iteration run on all draws at once
(:func:`batch_least_squares`, numpy arrays of draws × points). The 2.5 and
97.5 percentiles of the refitted parameters give 95 % intervals (the
percentile method, Efron & Tibshirani 1993, ch. 13), their standard
deviation the standard uncertainty, their correlation matrix the
correlations.

An error common to every shot of one bar set (its modulus, gauge factors,
gains: the shots' uncertainty budget, group "bar set") moves all its curves
together and leaves no scatter to resample. Where the curves carry that
budget, it enters as **shared terms**: each draw adds Σ_k a_k z_k with z_k
standard normal, one per term and draw, a_k the change of the data for one
standard uncertainty of a shared stress or strain scale (propagation of
distributions by sampling, JCGM 101:2008 §5.9 and §7, combined here with
the resampling). What no term carries: a bias of the reduction method (at
the yield knee, say) that is the same on every shot.

References
----------
.. [1] B. Efron and R. J. Tibshirani, An Introduction to the Bootstrap.
   New York: Chapman & Hall, 1993 (ch. 6 standard errors, ch. 9 regression
   models, ch. 13 percentile intervals; from memory).
.. [2] H. R. Künsch, "The jackknife and the bootstrap for general stationary
   observations," Ann. Statist., vol. 17, no. 3, pp. 1217–1241, 1989,
   doi:10.1214/aos/1176347265.
.. [3] D. N. Politis and J. P. Romano, "A circular block-resampling procedure
   for stationary data," in Exploring the Limits of Bootstrap, R. LePage and
   L. Billard, Eds. New York: Wiley, 1992, pp. 263–270 (from memory).
.. [4] A. C. Davison and D. V. Hinkley, Bootstrap Methods and their
   Application. Cambridge: Cambridge University Press, 1997 (§3.8, hierarchical
   data; from memory).
.. [5] JCGM 101:2008, Evaluation of measurement data — Supplement 1 to the
   "Guide to the expression of uncertainty in measurement" — Propagation of
   distributions using a Monte Carlo method. BIPM, 2008.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = [
    "pooled_autocorrelation",
    "correlation_length",
    "circular_block_indices",
    "curve_offsets",
    "offset_inflation",
    "batch_least_squares",
    "BootstrapResult",
    "bootstrap",
    "DEFAULT_DRAWS",
    "DEFAULT_SEED",
]

#: Bootstrap draws by default: Efron & Tibshirani (1993, ch. 19) ask for about 1000 for percentile intervals.
DEFAULT_DRAWS = 1000
#: Seed of the bootstrap's random numbers (results are reproducible).
DEFAULT_SEED = 1983


def pooled_autocorrelation(groups, max_lag):
    """Autocorrelation of several residual sequences pooled, lags 0..max_lag.

    Parameters
    ----------
    groups : sequence of array_like
        Residual sequences on an equal-step grid, each with mean about zero
        [any unit, the same for all].
    max_lag : int
        Largest lag [points].

    Returns
    -------
    numpy.ndarray
        ρ(k), k = 0..max_lag [1]: Σ e_t e_{t+k} over every sequence divided by
        Σ e_t² (the usual biased estimator, Box & Jenkins 1976, from memory).
    """
    num = np.zeros(max_lag + 1)
    den = 0.0
    for e in groups:
        e = np.asarray(e, float)
        den += float(np.dot(e, e))
        for k in range(min(max_lag, e.size - 1) + 1):
            num[k] += float(np.dot(e[: e.size - k], e[k:]))
    return num / den if den > 0 else np.r_[1.0, np.zeros(max_lag)]


def correlation_length(groups, step):
    """Correlation length of residuals along the curves [same unit as ``step``].

    Where the pooled autocorrelation (:func:`pooled_autocorrelation`) stops
    being significantly positive: the first lag k with
    ρ(k) ≤ 2·√((1 + 2 Σ_{j<k} ρ(j)²)/N), Bartlett's large-sample standard
    error of ρ(k) when the correlation stops at lag k − 1 (the test that finds
    the order of a moving-average process; Bartlett 1946, Box & Jenkins 1976,
    ch. 6, from memory), placed between lags k − 1 and k where ρ minus that
    bound crosses zero (linear interpolation), times the grid step. A moving
    average of q + 1 white terms gets about q + 1 steps, white noise about one
    step; the interpolation keeps the length from jumping by whole grid steps,
    so that two grids of the same curves give about the same length in strain.

    Parameters
    ----------
    groups : sequence of array_like
        Residual sequences, one per curve, on the grid.
    step : float
        Grid step [1, plastic strain].

    Returns
    -------
    float
        Correlation length [1, plastic strain].
    """
    longest = max(np.asarray(g).size for g in groups)
    n_total = sum(np.asarray(g).size for g in groups)
    rho = pooled_autocorrelation(groups, max(1, longest // 2))
    seen = 0.0
    above = rho[0] - 2.0 * math.sqrt(1.0 / n_total)
    for k in range(1, rho.size):
        margin = rho[k] - 2.0 * math.sqrt((1.0 + 2.0 * seen) / n_total)
        if margin <= 0.0:
            return (k - 1 + above / (above - margin)) * step
        seen += rho[k] ** 2
        above = margin
    return (rho.size - 1) * step


def circular_block_indices(n, block, draws, rng, min_blocks=256):
    """Indices of a circular block bootstrap of a sequence of length n.

    Blocks are laid out in the sequence's own coordinate (points, a real
    number): output point i lies in block m = ⌊i/block⌋ at offset
    i − m·block, and takes the point nearest to u_m·n + i − m·block (mod n),
    u_m uniform on [0, 1). With block and n scaled together (the same curve
    on a grid 10× finer, the block the same length in strain) and the same
    random numbers, a draw picks the same stretches of the curve on either
    grid: the bootstrap does not depend on the grid step beyond the
    sampling itself. Random numbers are drawn ``max(blocks, min_blocks)``
    per row, so that grids needing a different count of blocks still share
    them.

    Parameters
    ----------
    n : int
        Sequence length [points].
    block : float
        Block length [points], clipped to [1, n]; blocks wrap around the end
        (Politis & Romano 1992).
    draws : int
        Number of resampled sequences.
    rng : numpy.random.Generator
    min_blocks : int
        Uniform numbers drawn per row at least.

    Returns
    -------
    numpy.ndarray
        Shape (draws, n), int: each row concatenates ⌈n/block⌉ blocks of
        consecutive indices (mod n), cut to n.
    """
    block = float(max(1.0, min(float(block), n)))
    k = int(math.ceil(n / block - 1e-9))
    u = rng.random((draws, max(k, int(min_blocks))))[:, :k]
    i = np.arange(n)
    m = np.minimum((i / block + 1e-9).astype(int), k - 1)
    pos = u[:, m] * n + (i - m * block)[None, :]
    return np.floor(pos + 0.5).astype(int) % n


def curve_offsets(residuals, model, weights):
    """Relative offset of each curve: the weighted least-squares δ in r ≈ δ·model.

    Parameters
    ----------
    residuals, model, weights : sequence of array_like
        Per curve: data − model [Pa], model [Pa], residual weights [1/Pa].

    Returns
    -------
    numpy.ndarray
        δ_j per curve [1] (0.01: the curve lies 1 % above the fitted law).
    """
    out = []
    for r, m, w in zip(residuals, model, weights):
        wm = np.asarray(w) * np.asarray(m)
        out.append(float(np.dot(wm, np.asarray(w) * np.asarray(r)) / np.dot(wm, wm)))
    return np.array(out)


def offset_inflation(jacobian, model, sizes):
    """Factor that restores the spread of curve offsets the fit absorbed.

    A fit absorbs part of every curve's scale error into its parameters (an
    overall scale into A and B, a rate trend into C), so the fitted offsets
    δ̂ scatter less than the true ones. Linearising, δ̂ = K δ with
    K = D⁻¹ Mᵀ (I − H) M (M: each curve's weighted model on its own points,
    D = diag(MᵀM), H the hat matrix of the weighted Jacobian); for
    independent offsets of variance τ², the centred offsets c = (I − 11ᵀ/N)δ̂
    have E[Σ c²] = τ² tr(CKKᵀC). Resampling c·s, s² = N / tr(CKKᵀC), gives
    draws of variance τ̂² (the leverage correction of residual resampling,
    Davison & Hinkley 1997, eq. 3.11 in spirit; from memory).

    Parameters
    ----------
    jacobian : numpy.ndarray
        Weighted Jacobian of the model at the fit, (points, parameters) [1].
    model : numpy.ndarray
        Weighted model at the fit, (points,) [1].
    sizes : sequence of int
        Points per curve, in order.

    Returns
    -------
    float
        s [1]; NaN when the offsets carry (almost) no degrees of freedom
        beyond the parameters (tr(CKKᵀC) < 0.5).
    """
    n_pts = int(sum(sizes))
    n_c = len(sizes)
    M = np.zeros((n_pts, n_c))
    edges = np.concatenate(([0], np.cumsum(sizes)))
    for j in range(n_c):
        M[edges[j]:edges[j + 1], j] = model[edges[j]:edges[j + 1]]
    Q, _ = np.linalg.qr(jacobian)
    resid_M = M - Q @ (Q.T @ M)          # (I − H) M
    K = (M.T @ resid_M) / np.sum(M * M, axis=0)[:, None]
    C = np.eye(n_c) - 1.0 / n_c
    CK = C @ K
    tr = float(np.sum(CK * CK))
    return math.sqrt(n_c / tr) if tr >= 0.5 else float("nan")


def batch_least_squares(fun, theta0, y, weights, lower, upper, max_iter=60, tol=1e-7):
    """Weighted least squares for many data sets at once (Levenberg–Marquardt).

    Minimises Σ (w·(y_b − f(θ_b)))² for every row b independently, all rows
    advanced together with numpy: one model call per parameter and iteration
    gives a forward-difference Jacobian of every row. Marquardt's scaling of
    the damping (Marquardt 1963, doi:10.1137/0111030); steps are clipped to
    the bounds.

    Parameters
    ----------
    fun : callable
        ``fun(theta)`` with theta of shape (B, p) returns the model, (B, N).
    theta0 : numpy.ndarray
        Start, (p,) or (B, p).
    y : numpy.ndarray
        Data, (B, N).
    weights : numpy.ndarray
        Residual weights, (N,).
    lower, upper : numpy.ndarray
        Bounds, (p,) (may be ±inf).
    max_iter : int
        Iterations at most.
    tol : float
        Stop a row when its step is below this relative to the parameter
        (or to 10⁻³ of its bound span) and its cost fell by less than this
        relative amount.

    Returns
    -------
    theta : numpy.ndarray
        (B, p) fitted values.
    converged : numpy.ndarray of bool
        (B,) rows that met the tolerance within ``max_iter``.
    """
    B = y.shape[0]
    theta = np.broadcast_to(np.asarray(theta0, float), (B, len(lower))).copy()
    p = theta.shape[1]
    span = np.where(np.isfinite(upper - lower), upper - lower, np.abs(theta).max(axis=0) + 1.0)
    h_abs = 1e-7 * np.maximum(np.abs(theta), 1e-3 * span)

    with np.errstate(all="ignore"):
        r, cost = _cost_rows(fun, theta, y, weights)
    lam = np.full(B, 1e-3)
    done = ~np.isfinite(cost)
    for _ in range(max_iter):
        act = ~done
        if not act.any():
            break
        th, ra = theta[act], r[act]
        f0 = y[act] - ra / weights
        J = np.empty((th.shape[0], y.shape[1], p))
        for i in range(p):
            t = th.copy()
            t[:, i] += h_abs[act, i]
            with np.errstate(all="ignore"):
                J[:, :, i] = (fun(t) - f0) * weights / h_abs[act, i][:, None]
        J = np.nan_to_num(J, nan=0.0, posinf=0.0, neginf=0.0)
        Jt = J.transpose(0, 2, 1)
        JtJ = Jt @ J
        g = (Jt @ ra[:, :, None])[:, :, 0]
        # Marquardt's damping on the equations scaled to a unit diagonal (parameters of very different sizes,
        # Pa beside exponents, would otherwise lose the small directions to round-off)
        d = np.sqrt(np.maximum(np.einsum("bii->bi", JtJ), 1e-300))
        A = JtJ / (d[:, :, None] * d[:, None, :]) + lam[act, None, None] * np.eye(p)
        step = np.einsum("bij,bj->bi", np.linalg.pinv(A), g / d) / d  # pinv: a singular row, minimum-norm step
        trial = np.clip(th + step, lower, upper)
        with np.errstate(all="ignore"):
            r_t, c_t = _cost_rows(fun, trial, y[act], weights)
        better = np.isfinite(c_t) & (c_t <= cost[act])
        idx = np.flatnonzero(act)
        small = (np.abs(trial - th) <= tol * (np.abs(th) + 1e-3 * span)).all(axis=1)
        gain = (cost[act] - np.where(better, c_t, cost[act])) <= tol * np.maximum(cost[act], 1e-300)
        theta[idx[better]] = trial[better]
        r[idx[better]] = r_t[better]
        cost[idx[better]] = c_t[better]
        lam[idx] = np.where(better, lam[idx] / 10.0, lam[idx] * 10.0)
        # at the minimum a tiny step may come out a hair worse by round-off: that is convergence too
        flat = ~better & small & (np.abs(c_t - cost[act]) <= 1e-10 * np.maximum(cost[act], 1e-300))
        stop = (better & small & gain) | flat
        lam[idx[flat]] /= 10.0
        done[idx] = stop | (lam[idx] > 1e12)
    converged = done & (lam <= 1e12)
    return theta, converged


def _from_fitted(theta, log_scale):
    """SI values from fitted coordinates (log10 where ``log_scale``)."""
    v = np.array(theta, float, copy=True)
    v[:, log_scale] = 10.0 ** v[:, log_scale]
    return v


def _cost_rows(fun, theta, y, weights):
    r = (y - fun(theta)) * weights
    return r, np.einsum("bn,bn->b", r, r)


@dataclass(frozen=True)
class BootstrapResult:
    """Parameter uncertainties from the bootstrap over whole curves (SI values).

    Attributes
    ----------
    names : tuple of str
        The varied parameters, in order.
    samples : numpy.ndarray
        (draws kept, parameters) refitted values [SI].
    u : dict
        Standard uncertainty (standard deviation of the draws) by name [SI].
    low, high : dict
        95 % percentile interval by name [SI].
    correlation : numpy.ndarray
        (parameters, parameters) correlation matrix of the draws [1].
    draws : int
        Draws asked for.
    failed : int
        Draws whose refit did not converge (left out).
    correlation_length : float
        Residual correlation length [1, plastic strain].
    block_length : float
        Block length [1, plastic strain].
    offset_scatter : float
        Standard deviation of the curves' relative offsets after inflation [1]
        (NaN: not estimable, shot level left out).
    offset_inflation : float
        s of :func:`offset_inflation` [1].
    seed : int
        Random seed.
    level : float
        Interval probability (0.95).
    shared : tuple of str
        The shared terms drawn with every draw, in words (empty: none).
    """

    names: tuple
    samples: np.ndarray
    u: dict
    low: dict
    high: dict
    correlation: np.ndarray
    draws: int
    failed: int
    correlation_length: float
    block_length: float
    offset_scatter: float
    offset_inflation: float
    seed: int
    level: float = 0.95
    shared: tuple = ()


def bootstrap(predict, theta_hat, lower, upper, names, log_scale, y, weights, sizes, strain, *, draws=DEFAULT_DRAWS,
              seed=DEFAULT_SEED, step=None, chunk=250, level=0.95, shared=None, shared_labels=()):
    """The two-level bootstrap of a fitted model (module docstring), all draws refitted at once.

    Parameters
    ----------
    predict : callable
        ``predict(values)`` with ``values`` a dict of the varied parameters'
        SI values, each of shape (B, 1), returns the model at every data
        point, shape (B, N) [Pa].
    theta_hat : numpy.ndarray
        The fit in fitted coordinates (log10 of ``log_scale`` parameters), (p,).
    lower, upper : numpy.ndarray
        Bounds in fitted coordinates, (p,).
    names : sequence of str
        Parameter names, (p,).
    log_scale : sequence of bool
        Which parameters are fitted as log10.
    y : numpy.ndarray
        Data, curves concatenated, (N,) [Pa].
    weights : numpy.ndarray
        Residual weights of the fit, (N,) [1/Pa or 1/MPa].
    sizes : sequence of int
        Points per curve, in the order of ``y``.
    strain : numpy.ndarray
        Plastic strain of every point, (N,) [1].
    draws : int
        Bootstrap draws.
    seed : int
        Random seed.
    step : float, optional
        Spacing of the points along a curve [1, plastic strain] for the
        correlation length; default the median spacing.
    chunk : int
        Draws refitted together (memory: chunk × N × p floats).
    level : float
        Interval probability.
    shared : numpy.ndarray, optional
        (K, N) shared terms a_k [Pa]: each draw adds Σ_k a_k z_k to its data,
        z_k independent standard normal (module docstring). Drawn from a
        stream of their own, so the resampling's draws are the same with or
        without them.
    shared_labels : sequence of str
        The K terms in words, for the result.

    Returns
    -------
    BootstrapResult
    """
    names = tuple(names)
    log_scale = np.asarray(log_scale, bool)
    theta_hat = np.asarray(theta_hat, float)
    sizes = [int(s) for s in sizes]
    edges = np.concatenate(([0], np.cumsum(sizes)))

    def values(theta):
        v = _from_fitted(theta, log_scale)
        return {n: v[:, i:i + 1] for i, n in enumerate(names)}

    def fun(theta):
        return predict(values(theta))

    model = fun(theta_hat[None, :])[0]
    resid = y - model
    parts = [slice(edges[j], edges[j + 1]) for j in range(len(sizes))]
    delta = curve_offsets([resid[s] for s in parts], [model[s] for s in parts], [weights[s] for s in parts])
    within = [resid[s] - delta[j] * model[s] for j, s in enumerate(parts)]
    if step is None:
        gaps = np.concatenate([np.diff(strain[sl]) for sl in parts])
        step = float(np.median(gaps[gaps > 0])) if np.any(gaps > 0) else 1.0
    ell = correlation_length(within, step)
    block = 2.0 * ell
    # the weighted Jacobian at the fit, for the offsets' leverage
    h = 1e-7 * np.maximum(np.abs(theta_hat), 1e-3 * np.where(np.isfinite(upper - lower), upper - lower, 1.0))
    J = np.empty((y.size, theta_hat.size))
    for i in range(theta_hat.size):
        t = theta_hat.copy()
        t[i] += h[i]
        J[:, i] = (fun(t[None, :])[0] - model) * weights / h[i]
    s = offset_inflation(J, model * weights, sizes) if len(sizes) >= 2 else float("nan")
    pool = s * (delta - delta.mean()) if math.isfinite(s) else np.zeros_like(delta)
    # within-curve residuals: the usual small inflation for the parameters a fit absorbs
    e_scale = math.sqrt(y.size / max(y.size - theta_hat.size, 1))
    # one stream per curve for its blocks and one for the offsets: a draw resamples the same shots and the same
    # stretches of strain whatever the grid (common random numbers), so grids differ only by what they change
    rng_off = np.random.default_rng([seed, 0])
    rng_blk = [np.random.default_rng([seed, 1, j]) for j in range(len(sizes))]
    rng_shared = np.random.default_rng([seed, 2])
    shared = None if shared is None or not np.size(shared) else np.atleast_2d(np.asarray(shared, float))
    kept, failed = [], 0
    for start in range(0, draws, chunk):
        b = min(chunk, draws - start)
        ystar = np.empty((b, y.size))
        picks = rng_off.integers(0, len(sizes), size=(b, len(sizes)))
        for j, sl in enumerate(parts):
            n = sizes[j]
            idx = circular_block_indices(n, block / step, b, rng_blk[j])
            ystar[:, sl] = model[sl] * (1.0 + pool[picks[:, j]][:, None]) + e_scale * within[j][idx]
        if shared is not None:
            ystar += rng_shared.standard_normal((b, shared.shape[0])) @ shared
        theta, ok = batch_least_squares(fun, theta_hat, ystar, weights, lower, upper)
        failed += int(np.count_nonzero(~ok))
        kept.append(theta[ok])
    theta = np.vstack(kept) if kept else np.empty((0, theta_hat.size))
    vals = _from_fitted(theta, log_scale)
    q = 100.0 * (1.0 - level) / 2.0
    lo, hi = (np.percentile(vals, [q, 100.0 - q], axis=0) if len(vals) else
              (np.full(theta_hat.size, np.nan), np.full(theta_hat.size, np.nan)))
    sd = vals.std(axis=0, ddof=1) if len(vals) > 1 else np.full(theta_hat.size, np.nan)
    with np.errstate(all="ignore"):
        corr = np.corrcoef(vals, rowvar=False) if len(vals) > 2 else np.full((theta_hat.size,) * 2, np.nan)
    corr = np.atleast_2d(corr)
    scatter = float(np.sqrt(np.mean(pool ** 2))) if math.isfinite(s) else float("nan")
    return BootstrapResult(
        names=names, samples=vals, u=dict(zip(names, map(float, sd))), low=dict(zip(names, map(float, lo))),
        high=dict(zip(names, map(float, hi))), correlation=corr, draws=int(draws), failed=failed,
        correlation_length=float(ell), block_length=float(block), offset_scatter=scatter,
        offset_inflation=float(s), seed=int(seed), level=float(level),
        shared=tuple(shared_labels) if shared is not None else (),
    )
