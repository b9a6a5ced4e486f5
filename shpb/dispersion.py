"""Geometric dispersion in a cylindrical bar (Pochhammer–Chree) and its correction.

A strain gauge sits some distance from the specimen. In a bar of finite
diameter the short-wavelength content of a pulse travels slower than the
bar wave speed c0, so a shift by ``distance / c0`` alone leaves spurious
oscillations. This module solves the Pochhammer–Chree frequency equation for
the fundamental longitudinal mode, tabulates the phase and group velocity
once per Poisson ratio, and moves a strain history along the bar by shifting
the phase of each harmonic (Follansbee & Frantz 1983; Gong, Malvern &
Jenkins 1990).

Dimensionless variables used throughout (``a`` bar radius, ``Λ`` wavelength,
``k = 2π/Λ``, ``ω = 2π f``, ``c = ω/k`` phase velocity):

* ``a_over_lambda = a/Λ`` (so ``ka = 2π a/Λ``);
* ``c/c0`` the phase velocity over the bar wave speed;
* ``f a / c0`` the dimensionless frequency; ``f a/c0 = (a/Λ)(c/c0)``.

Physics only: no printing, and no files but the solved tables, which
:mod:`shpb.cache` keeps on disk per Poisson ratio so that a process or batch
worker does not solve them again. All inputs SI.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field

import numpy as np

from . import cache
from .errors import AnalysisError, InputError

# scipy (special functions, root finders, splines) is imported where a table is solved: the tables are
# kept on disk (shpb.cache), so a process that finds them there needs numpy only.

__all__ = [
    "DispersionCurve",
    "phase_velocity_ratio",
    "rayleigh_speed_ratio",
    "normalized_curve",
    "phase_velocity",
    "group_velocity",
    "mean_to_surface_strain_ratio",
    "second_mode_onset",
    "propagate",
    "dispersion_info",
    "dispersion_table",
]

#: Default upper end of the tabulated curve, a/Λ. At a/Λ = 2 the fundamental
#: mode is within 0.5 % of the Rayleigh speed for ν ≥ 0.29 (1.2 % at ν = 0.1,
#: 1.8 % as ν → 0), so holding c beyond it changes little.
DEFAULT_MAX_A_OVER_LAMBDA = 2.0
#: Points in the default table (uniform in a/Λ).
DEFAULT_TABLE_POINTS = 2000
#: Largest a/Λ accepted. The bracketing below was checked against a dense
#: scan to a/Λ = 80 for ν from 1e-9 to 0.4999 (the fundamental and the next
#: root stay ≥ 3 % of c0 apart); at a/Λ = 40 the Bessel terms are ~1e218, well
#: inside double range.
MAX_A_OVER_LAMBDA_LIMIT = 40.0
#: Default a/Λ limit of the radial amplitude factors: the surface strain of
#: the fundamental mode passes through zero at a/Λ ≈ 0.38 (ν = 0.29; 0.30 to
#: 0.45 over ν = 0.01 to 0.5), where the mean/surface ratio is singular.
DEFAULT_AMPLITUDE_LIMIT = 0.25

# Grid spacing (in units of c/cT) of the bracketing scan. Below c0 the
# fundamental and the next root are never closer than ~0.05 cT (checked by a
# dense scan to a/Λ = 80); for ν → 0 the pair that meets near a/Λ ≈ 0.295
# straddles c0, which is the top of the scan.
_SCAN_STEP = 0.014
# Lower end of the scan as a fraction of the Rayleigh speed: the fundamental
# dips slightly below cR at large a/Λ (to 0.979 cR for ν → 0) before tending
# to it from below.
_SCAN_LOW = 0.95


# --------------------------------------------------------------------------
# input checks
# --------------------------------------------------------------------------
def _check_poisson(poisson_ratio, where="poisson_ratio"):
    try:
        nu = float(poisson_ratio)
    except (TypeError, ValueError):
        raise InputError(f"Poisson ratio must be a number in (0, 0.5), got {poisson_ratio!r}", where) from None
    if not (0.0 < nu < 0.5):
        raise InputError(f"Poisson ratio must be in (0, 0.5) (exclusive), got {poisson_ratio!r}", where)
    return nu


def _check_positive(value, name):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"must be a positive number, got {value!r}", name) from None
    if not (math.isfinite(v) and v > 0.0):
        raise InputError(f"must be a positive finite number, got {value!r}", name)
    return v


def _check_a_over_lambda_max(value):
    v = _check_positive(value, "max_a_over_lambda")
    if v > MAX_A_OVER_LAMBDA_LIMIT:
        raise InputError(f"must be at most {MAX_A_OVER_LAMBDA_LIMIT} (validated range), got {value!r}",
                         "max_a_over_lambda")
    return v


# --------------------------------------------------------------------------
# the frequency equation
# --------------------------------------------------------------------------
def _bessel_pair(p):
    """Return ``(C0, C1)`` with C0 = J0(√p), C1 = J1(√p)/√p, entire in p.

    For p < 0 (imaginary argument z = i y) J0(iy) = I0(y) and
    J1(iy)/(iy) = I1(y)/y, so both are real and continuous through p = 0
    (C0 → 1, C1 → 1/2). Using p = z² instead of z removes the branch
    choice of the square root altogether.
    """
    from scipy import special as _sp

    p = np.asarray(p, dtype=float)
    y = np.sqrt(np.abs(p))
    c0 = np.empty_like(y)
    c1 = np.empty_like(y)
    pos = p > 0.0
    neg = ~pos
    yp, yn = y[pos], y[neg]
    c0[pos] = _sp.j0(yp)
    c0[neg] = _sp.i0(yn)
    with np.errstate(invalid="ignore", divide="ignore"):
        c1[pos] = _sp.j1(yp) / yp
        c1[neg] = _sp.i1(yn) / yn
    # series J1(y)/y = 1/2 - y²/16 + ... ; below y = 1e-6 the first term is exact
    small = y < 1e-6
    c1[small] = 0.5 - p[small] / 16.0
    return c0, c1


def _determinant(A2, B2, K2, bessel_a, bessel_b):
    """Pochhammer–Chree determinant in the entire form used here.

    With A = αa, B = βa, K = ka, Graff (1975) eq. (8.2.xx) multiplied by a⁴
    and divided by B reads
        2A²(B²+K²) C1(A²) C1(B²) − (B²−K²)² C0(A²) C1(B²) − 4K²A² C1(A²) C0(B²) = 0,
    a real, entire function of A², B², K² (no branch of α or β needed).
    """
    c0a, c1a = bessel_a
    c0b, c1b = bessel_b
    return 2.0 * A2 * (B2 + K2) * c1a * c1b - (B2 - K2) ** 2 * c0a * c1b - 4.0 * K2 * A2 * c1a * c0b


def _q2(nu):
    """(cT/cL)² = (1 − 2ν) / (2(1 − ν))."""
    return (1.0 - 2.0 * nu) / (2.0 * (1.0 - nu))


def _frequency_function(s, K, nu):
    """Frequency equation at phase velocity ratio s = c/cT and ka = K, over K⁴.

    α²a² = K²(s² q² − 1), β²a² = K²(s² − 1), q = cT/cL; α² < 0 on the whole
    fundamental branch (c < c0 < cL) and β² changes sign where c = cT.
    """
    s = np.asarray(s, dtype=float)
    K = np.asarray(K, dtype=float)
    a2 = s * s * _q2(nu) - 1.0
    b2 = s * s - 1.0
    K2 = K * K
    return _determinant(a2, b2, 1.0, _bessel_pair(K2 * a2), _bessel_pair(K2 * b2))


def rayleigh_speed_ratio(poisson_ratio):
    """Rayleigh surface-wave speed over the shear wave speed, cR/cT.

    Root in (0, 1) of the Rayleigh equation
    (2 − x²)² = 4 √(1 − q² x²) √(1 − x²), x = cR/cT, q² = (1 − 2ν)/(2(1 − ν)).
    It is the high-frequency limit of the fundamental-mode phase velocity.

    Parameters
    ----------
    poisson_ratio : float
        Poisson ratio ν of the bar [1], in (0, 0.5).

    Returns
    -------
    float
        cR/cT [1].

    References
    ----------
    .. [1] Lord Rayleigh, "On waves propagated along the plane surface of an
       elastic solid", Proc. London Math. Soc. 17, 4–11 (1885),
       doi:10.1112/plms/s1-17.1.4 (DOI from memory).
    .. [2] K. F. Graff, *Wave Motion in Elastic Solids*, Ohio State Univ.
       Press (1975), §6.3.
    """
    from scipy.optimize import brentq

    nu = _check_poisson(poisson_ratio)
    q2 = _q2(nu)

    def f(x):
        return (2.0 - x * x) ** 2 - 4.0 * math.sqrt(1.0 - q2 * x * x) * math.sqrt(1.0 - x * x)

    # f(0.5) < 0 < f(1) for every ν in (0, 0.5); cR/cT lies in (0.87, 0.96).
    return brentq(f, 0.5, 1.0, xtol=1e-15, rtol=4 * np.finfo(float).eps)


def _solve_fundamental(K, nu):
    """Fundamental-mode root s = c/cT at each ka = K (1-D array), vectorised.

    The fundamental mode is the lowest branch, so at fixed K its phase
    velocity is the smallest positive root. Each root is bracketed by the
    first sign change of the frequency function on a grid from 0.95 cR up to
    c0, then refined by a vectorised Illinois (modified regula falsi)
    iteration to a bracket width of a few ulp.
    """
    K = np.asarray(K, dtype=float)
    s0 = math.sqrt(2.0 * (1.0 + nu))  # c0/cT
    sR = rayleigh_speed_ratio(nu)
    out = np.full(K.shape, s0)
    todo = K > 0.0  # ka = 0: c = c0 exactly
    if not np.any(todo):
        return out
    Kt = K[todo]
    n_grid = int(math.ceil((s0 - _SCAN_LOW * sR) / _SCAN_STEP)) + 1
    grid = np.linspace(_SCAN_LOW * sR, s0, n_grid)
    fg = _frequency_function(grid[None, :], Kt[:, None], nu)
    sign_change = np.signbit(fg[:, 1:]) != np.signbit(fg[:, :-1])
    has = sign_change.any(axis=1)
    first = np.argmax(sign_change, axis=1)
    rows = np.arange(Kt.size)
    lo, hi = grid[first], grid[first + 1]
    flo, fhi = fg[rows, first], fg[rows, first + 1]
    # No sign change: only for ka so small that the root is within rounding
    # of c0 (c/c0 − 1 ≈ −ν²(ka)²/4, accepted below 2.5e-13); c = c0 there.
    if not np.all(has | (nu * nu * Kt * Kt < 1e-12)):
        raise AnalysisError(f"Pochhammer-Chree root not bracketed (poisson_ratio {nu}, ka up to {Kt.max():.3g})")
    lo = np.where(has, lo, s0)
    hi = np.where(has, hi, s0)
    flo = np.where(has, flo, 0.0)
    fhi = np.where(has, fhi, 0.0)
    root = _illinois(lambda s, idx: _frequency_function(s, Kt[idx], nu), lo, hi, flo, fhi)
    out[todo] = root
    return out


def _illinois(func, a, b, fa, fb, max_iter=200):
    """Vectorised Illinois method on brackets [a, b] with fa·fb ≤ 0."""
    a, b, fa, fb = (np.array(v, dtype=float) for v in (a, b, fa, fb))
    x = np.where(fa == 0.0, a, b)
    active = (fa != 0.0) & (fb != 0.0)
    eps = np.finfo(float).eps
    for _ in range(max_iter):
        idx = np.nonzero(active)[0]
        if idx.size == 0:
            break
        ai, bi, fai, fbi = a[idx], b[idx], fa[idx], fb[idx]
        xi = bi - fbi * (bi - ai) / (fbi - fai)
        # fall back to bisection if the secant step leaves the bracket
        bad = ~((xi > np.minimum(ai, bi)) & (xi < np.maximum(ai, bi)))
        xi = np.where(bad, 0.5 * (ai + bi), xi)
        fx = func(xi, idx)
        # same sign as f(b): the root is between a and x; keep a and halve
        # f(a) (the Illinois step that stops one end stagnating). Otherwise
        # the root is between b and x: b becomes the kept end.
        keep_a = np.signbit(fx) == np.signbit(fbi)
        a[idx] = np.where(keep_a, ai, bi)
        fa[idx] = np.where(keep_a, 0.5 * fai, fbi)
        b[idx], fb[idx] = xi, fx
        x[idx] = xi
        done = (fx == 0.0) | (np.abs(b[idx] - a[idx]) <= 4.0 * eps * np.abs(xi))
        active[idx[done]] = False
    return x


def phase_velocity_ratio(a_over_lambda, poisson_ratio):
    """Fundamental-mode phase velocity over the bar wave speed, c/c0.

    Solves the Pochhammer–Chree frequency equation of the first longitudinal
    mode of a free, solid, isotropic elastic cylinder directly (no table).

    Parameters
    ----------
    a_over_lambda : float or array_like
        Bar radius over wavelength, a/Λ [1], ≥ 0 and ≤ 40.
    poisson_ratio : float
        Poisson ratio ν [1], in (0, 0.5).

    Returns
    -------
    float or ndarray
        c/c0 [1]; 1 at a/Λ = 0, tending to the Rayleigh speed cR/c0 as
        a/Λ → ∞.

    Notes
    -----
    With α² = ω²/cL² − k², β² = ω²/cT² − k² the frequency equation is [3]_
    (2α/a)(β² + k²) J1(αa) J1(βa) − (β² − k²)² J0(αa) J1(βa)
    − 4k²αβ J1(αa) J0(βa) = 0. It is written here in terms of α²a², β²a²
    and J0(z), J1(z)/z, which are entire in z² and become I0, I1 of real
    argument when α² or β² is negative; the equation is then real and smooth
    through the point c = cT where β² changes sign. On the fundamental
    branch c < c0 < cL, so α² < 0 throughout. The root is bracketed and
    refined to a relative width of ~1e-15. Low-frequency limit:
    c/c0 ≈ 1 − ν²π²(a/Λ)² (Rayleigh; Love). c0 here is √(E/ρ) of the same
    material: (c0/cT)² = 2(1 + ν).

    References
    ----------
    .. [1] L. Pochhammer, "Ueber die Fortpflanzungsgeschwindigkeiten kleiner
       Schwingungen in einem unbegrenzten isotropen Kreiscylinder",
       J. reine angew. Math. 81, 324–336 (1876), doi:10.1515/crll.1876.81.324 (DOI from memory).
    .. [2] C. Chree, "The equations of an isotropic elastic solid in polar and
       cylindrical co-ordinates", Trans. Camb. Phil. Soc. 14, 250–369 (1889).
    .. [3] K. F. Graff, *Wave Motion in Elastic Solids*, Ohio State Univ.
       Press (1975), §8.2.
    .. [4] D. Bancroft, "The velocity of longitudinal waves in cylindrical
       bars", Phys. Rev. 59, 588–593 (1941), doi:10.1103/PhysRev.59.588 (DOI from memory).
    """
    nu = _check_poisson(poisson_ratio)
    x = np.asarray(a_over_lambda, dtype=float)
    if not np.all(np.isfinite(x)) or np.any(x < 0) or np.any(x > MAX_A_OVER_LAMBDA_LIMIT):
        raise InputError(f"a/Λ must be finite and in [0, {MAX_A_OVER_LAMBDA_LIMIT}]", "a_over_lambda")
    s = _solve_fundamental(np.atleast_1d(2.0 * np.pi * x).ravel(), nu)
    r = (s / math.sqrt(2.0 * (1.0 + nu))).reshape(x.shape)
    return float(r) if r.ndim == 0 else r


def _mean_to_surface(s, K, nu):
    """Mean over the section / surface value of the axial strain (mode shape).

    With the shear potential amplitude fixed by σ_rz(a) = 0,
    ε_zz(r) ∝ J0(αr) + 2αβ J1(αa) J0(βr) / ((k² − β²) J1(βa)); its section
    mean uses ∫0^a J0(γr) r dr = a J1(γa)/γ. In the entire form:
    ratio = 2 C1a C1b (1 − b2 + 2 a2) / (C0a C1b (1 − b2) + 2 a2 C1a C0b).
    """
    a2 = s * s * _q2(nu) - 1.0
    b2 = s * s - 1.0
    K2 = K * K
    c0a, c1a = _bessel_pair(K2 * a2)
    c0b, c1b = _bessel_pair(K2 * b2)
    return 2.0 * c1a * c1b * (1.0 - b2 + 2.0 * a2) / (c0a * c1b * (1.0 - b2) + 2.0 * a2 * c1a * c0b)


def mean_to_surface_strain_ratio(a_over_lambda, poisson_ratio):
    """Section-mean axial strain over surface axial strain, fundamental mode.

    Tyas & Watson's strain factor: a gauge reads the surface strain, the
    force in the bar follows the mean. 1 at a/Λ = 0; it grows with a/Λ and is
    singular where the surface strain of the mode vanishes (a/Λ ≈ 0.377 for
    ν = 0.29).

    Parameters
    ----------
    a_over_lambda : float or array_like
        a/Λ [1], in [0, 40].
    poisson_ratio : float
        Poisson ratio ν [1], in (0, 0.5).

    Returns
    -------
    float or ndarray
        mean/surface axial strain [1].

    References
    ----------
    .. [1] R. M. Davies, "A critical study of the Hopkinson pressure bar",
       Phil. Trans. R. Soc. A 240, 375–457 (1948), doi:10.1098/rsta.1948.0001 (DOI from memory).
    .. [2] A. Tyas and A. J. Watson, "An investigation of frequency domain
       dispersion correction of pressure bar signals", Int. J. Impact Eng. 25,
       87–101 (2001), doi:10.1016/S0734-743X(00)00031-7 (DOI from memory).
    """
    nu = _check_poisson(poisson_ratio)
    x = np.asarray(a_over_lambda, dtype=float)
    if not np.all(np.isfinite(x)) or np.any(x < 0) or np.any(x > MAX_A_OVER_LAMBDA_LIMIT):
        raise InputError(f"a/Λ must be finite and in [0, {MAX_A_OVER_LAMBDA_LIMIT}]", "a_over_lambda")
    K = np.atleast_1d(2.0 * np.pi * x).ravel()
    m = _mean_to_surface(_solve_fundamental(K, nu), K, nu).reshape(x.shape)
    return float(m) if m.ndim == 0 else m


# --------------------------------------------------------------------------
# tabulated curve
# --------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class DispersionCurve:
    """Normalised fundamental-mode dispersion table for one Poisson ratio.

    All arrays are read-only and share one index, uniform in a/Λ.

    Attributes
    ----------
    poisson_ratio : float
        Poisson ratio ν [1].
    a_over_lambda : ndarray
        a/Λ [1], from 0 to ``max_a_over_lambda``.
    phase_ratio : ndarray
        c/c0 [1].
    group_ratio : ndarray
        cg/c0 [1], cg = dω/dk.
    frequency : ndarray
        Dimensionless frequency f·a/c0 [1] = (a/Λ)(c/c0), increasing.
    mean_to_surface : ndarray
        Section-mean over surface axial strain [1] (singular near a/Λ ≈ 0.38).
    rayleigh_ratio : float
        cR/c0 [1], the a/Λ → ∞ limit of c/c0.
    """

    poisson_ratio: float
    a_over_lambda: np.ndarray
    phase_ratio: np.ndarray
    group_ratio: np.ndarray
    frequency: np.ndarray
    mean_to_surface: np.ndarray
    rayleigh_ratio: float
    _phase_spline: object = field(repr=False)

    @property
    def max_frequency(self):
        """Largest tabulated f·a/c0 [1]."""
        return float(self.frequency[-1])

    def phase_ratio_at(self, frequency):
        """c/c0 at dimensionless frequencies f·a/c0 [1] within the table.

        Cubic Hermite interpolation using the exact slope d(c/c0)/d(fa/c0);
        interpolation error < 1e-11 for the default table.
        """
        return self._phase_spline(frequency)

    def group_ratio_at(self, frequency):
        """cg/c0 at dimensionless frequencies f·a/c0 [1] within the table (cubic spline)."""
        return self._group_spline(frequency)

    @functools.cached_property
    def _group_spline(self):
        # built on first use: the reduction needs the phase velocity only (and so no scipy)
        from scipy.interpolate import CubicSpline

        return CubicSpline(self.frequency, self.group_ratio, extrapolate=False)


class _HermiteTable:
    """Piecewise cubic Hermite interpolant through (x, y) with slopes dydx; NaN outside [x0, x_end].

    The coefficients and the evaluation are those of
    ``scipy.interpolate.CubicHermiteSpline(x, y, dydx, extrapolate=False)``
    (the same floating-point operations, checked in tests/test_dispersion.py),
    written in numpy so that reading a cached table needs no scipy.
    """

    def __init__(self, x, y, dydx):
        self.x = np.asarray(x, dtype=float)
        dx = np.diff(self.x)
        slope = np.diff(y) / dx
        t = (dydx[:-1] + dydx[1:] - 2 * slope) / dx
        self.c = np.stack((t / dx, (slope - dydx[:-1]) / dx - t, dydx[:-1], y[:-1]))

    def __call__(self, x):
        x = np.asarray(x, dtype=float)
        i = np.clip(np.searchsorted(self.x, x, side="right") - 1, 0, self.x.size - 2)
        s = x - self.x[i]
        c0, c1, c2, c3 = self.c[:, i]
        s2 = s * s
        # the power sum in scipy's order: c3 + c2 s + c1 s² + c0 s³
        out = c3 + c2 * s + c1 * s2 + c0 * (s2 * s)
        return np.where((x >= self.x[0]) & (x <= self.x[-1]), out, np.nan)


def _derivative_s_K(s, K, nu):
    """ds/dK on the root curve by implicit differentiation, central differences."""
    hs = 1e-6 * s
    hK = 1e-6 * np.maximum(K, 1.0)
    fs = (_frequency_function(s + hs, K, nu) - _frequency_function(s - hs, K, nu)) / (2 * hs)
    fK = (_frequency_function(s, K + hK, nu) - _frequency_function(s, K - hK, nu)) / (2 * hK)
    return -fK / fs


#: Version of the solved tables in the disk cache: bump it when their computation changes.
_TABLES_VERSION = 1


@functools.lru_cache(maxsize=32)
def _curve_cached(nu, n, max_a_over_lambda):
    t = cache.arrays(f"dispersion-curve-{_TABLES_VERSION}",
                     {"poisson_ratio": nu, "n": n, "max_a_over_lambda": max_a_over_lambda},
                     lambda: _solve_curve(nu, n, max_a_over_lambda))
    for arr in t.values():
        arr.flags.writeable = False
    return DispersionCurve(
        poisson_ratio=nu,
        a_over_lambda=t["a_over_lambda"],
        phase_ratio=t["phase_ratio"],
        group_ratio=t["group_ratio"],
        frequency=t["frequency"],
        mean_to_surface=t["mean_to_surface"],
        rayleigh_ratio=float(t["rayleigh_ratio"]),
        _phase_spline=_HermiteTable(t["frequency"], t["phase_ratio"], t["phase_slope"]),
    )


def _solve_curve(nu, n, max_a_over_lambda):
    """The table's arrays: a/Λ, c/c0, cg/c0, f·a/c0, mean/surface strain, d(c/c0)/d(f·a/c0), cR/c0."""
    x = np.linspace(0.0, max_a_over_lambda, n)
    K = 2.0 * np.pi * x
    s = _solve_fundamental(K, nu)
    s0 = math.sqrt(2.0 * (1.0 + nu))
    dsdK = _derivative_s_K(s, K, nu)
    dsdK[0] = 0.0  # c(k) is even in k
    r = s / s0
    g = (s + K * dsdK) / s0  # cg = d(ω)/dk = c + k dc/dk
    phi = x * r
    if np.any(np.diff(phi) <= 0) or np.any(g <= 0):
        raise AnalysisError(f"fundamental-mode frequency not increasing with a/Λ (poisson_ratio {nu}): solver failure")
    drdphi = 2.0 * np.pi * dsdK / (s0 * g)  # (dr/dK) / (dφ/dK), dφ/dK = g / (2π)
    return {"a_over_lambda": x, "phase_ratio": r, "group_ratio": g, "frequency": phi,
            "mean_to_surface": _mean_to_surface(s, K, nu), "phase_slope": drdphi,
            "rayleigh_ratio": rayleigh_speed_ratio(nu) / s0}


def _cache_key(nu):
    """ν rounded to 12 significant digits, so 0.29 and 0.29000000000001 share a table."""
    return float(f"{nu:.12g}")


def normalized_curve(poisson_ratio, n=DEFAULT_TABLE_POINTS, max_a_over_lambda=DEFAULT_MAX_A_OVER_LAMBDA):
    """Fundamental-mode table c/c0, cg/c0 against a/Λ and f·a/c0, cached.

    Computed once per (ν to 12 significant digits, n, max a/Λ) and kept on
    disk (:mod:`shpb.cache`) and in an LRU cache of the process (32 entries);
    ``normalized_curve.cache_clear()`` empties the latter.

    Parameters
    ----------
    poisson_ratio : float
        Poisson ratio ν [1], in (0, 0.5).
    n : int
        Number of table points, uniform in a/Λ (≥ 16).
    max_a_over_lambda : float
        Upper end of the table, a/Λ [1], ≤ 40.

    Returns
    -------
    DispersionCurve
        The table (read-only arrays) and interpolants.

    References
    ----------
    .. [1] D. Bancroft, Phys. Rev. 59, 588–593 (1941),
       doi:10.1103/PhysRev.59.588 (DOI from memory).
    """
    nu = _check_poisson(poisson_ratio)
    if isinstance(n, bool) or int(n) != n or int(n) < 16:
        raise InputError(f"table size must be an integer ≥ 16, got {n!r}", "n")
    xmax = _check_a_over_lambda_max(max_a_over_lambda)
    return _curve_cached(_cache_key(nu), int(n), xmax)


normalized_curve.cache_clear = _curve_cached.cache_clear
normalized_curve.cache_info = _curve_cached.cache_info


def _dimensionless_frequency(frequency, bar_radius, bar_wave_speed, curve):
    f = np.asarray(frequency, dtype=float)
    if not np.all(np.isfinite(f)) or np.any(f < 0):
        raise InputError("frequency must be finite and ≥ 0 [Hz]", "frequency")
    phi = f * bar_radius / bar_wave_speed
    if np.any(phi > curve.max_frequency):
        fmax = curve.max_frequency * bar_wave_speed / bar_radius
        raise InputError(
            f"frequency above the tabulated range ({fmax / 1e3:.1f} kHz, a/Λ = "
            f"{curve.a_over_lambda[-1]:g}); raise max_a_over_lambda (≤ {MAX_A_OVER_LAMBDA_LIMIT})",
            "frequency",
        )
    return phi


def phase_velocity(frequency, bar_radius, bar_wave_speed, poisson_ratio, *,
                   max_a_over_lambda=DEFAULT_MAX_A_OVER_LAMBDA):
    """Fundamental-mode phase velocity c(f) of a cylindrical bar.

    Parameters
    ----------
    frequency : float or array_like
        Frequency f [Hz], ≥ 0.
    bar_radius : float
        Bar radius a [m].
    bar_wave_speed : float
        Bar wave speed c0 [m/s], used as given (pass the measured value when
        there is one).
    poisson_ratio : float
        Poisson ratio ν [1], in (0, 0.5).
    max_a_over_lambda : float, optional
        Extent of the cached table, a/Λ [1].

    Returns
    -------
    float or ndarray
        Phase velocity c [m/s].

    Raises
    ------
    InputError
        Bad parameters, or f·a/c0 beyond the table.

    References
    ----------
    .. [1] D. Bancroft, Phys. Rev. 59, 588–593 (1941),
       doi:10.1103/PhysRev.59.588 (DOI from memory).
    """
    a = _check_positive(bar_radius, "bar_radius")
    c0 = _check_positive(bar_wave_speed, "bar_wave_speed")
    curve = normalized_curve(poisson_ratio, max_a_over_lambda=max_a_over_lambda)
    phi = _dimensionless_frequency(frequency, a, c0, curve)
    c = c0 * curve.phase_ratio_at(phi)
    return float(c) if np.ndim(c) == 0 else c


def group_velocity(frequency, bar_radius, bar_wave_speed, poisson_ratio, *,
                   max_a_over_lambda=DEFAULT_MAX_A_OVER_LAMBDA):
    """Fundamental-mode group velocity cg(f) = dω/dk of a cylindrical bar.

    Parameters
    ----------
    frequency : float or array_like
        Frequency f [Hz], ≥ 0.
    bar_radius : float
        Bar radius a [m].
    bar_wave_speed : float
        Bar wave speed c0 [m/s].
    poisson_ratio : float
        Poisson ratio ν [1], in (0, 0.5).
    max_a_over_lambda : float, optional
        Extent of the cached table, a/Λ [1].

    Returns
    -------
    float or ndarray
        Group velocity cg [m/s]; it has a minimum (the slowest energy, the
        "Airy phase") below cR.

    References
    ----------
    .. [1] K. F. Graff, *Wave Motion in Elastic Solids* (1975), §8.2.
    """
    a = _check_positive(bar_radius, "bar_radius")
    c0 = _check_positive(bar_wave_speed, "bar_wave_speed")
    curve = normalized_curve(poisson_ratio, max_a_over_lambda=max_a_over_lambda)
    phi = _dimensionless_frequency(frequency, a, c0, curve)
    c = c0 * curve.group_ratio_at(phi)
    return float(c) if np.ndim(c) == 0 else c


# --------------------------------------------------------------------------
# first higher mode
# --------------------------------------------------------------------------
@functools.lru_cache(maxsize=32)
def _second_mode_onset_cached(nu):
    t = cache.arrays(f"second-mode-onset-{_TABLES_VERSION}", {"poisson_ratio": nu},
                     lambda: {"onset": _solve_second_mode_onset(nu)})
    return float(t["onset"])


def _solve_second_mode_onset(nu):
    """f·a/c0 [1] from which the second longitudinal mode propagates."""
    from scipy.optimize import brentq, minimize_scalar

    # Ω = ωa/cT. At fixed ka = K the determinant in (Ω, K) form has the
    # fundamental as its lowest positive root; the next root is the second
    # longitudinal mode. Its lowest frequency over K can lie below its k = 0
    # cut-off (backward-wave region), so take the minimum over K.
    q2 = _q2(nu)
    s0 = math.sqrt(2.0 * (1.0 + nu))

    def g(W, K):
        A2 = W * W * q2 - K * K
        B2 = W * W - K * K
        return _determinant(A2, B2, K * K, _bessel_pair(A2), _bessel_pair(B2))

    def second_root(K):
        W1 = float(_solve_fundamental(np.array([K]), nu)[0]) * K  # fundamental Ω
        W = np.linspace(W1 + 1e-3, 6.0, 1200)
        gw = g(W, K)
        ch = np.nonzero(np.signbit(gw[1:]) != np.signbit(gw[:-1]))[0]
        if ch.size == 0:
            return np.inf
        i = ch[0]
        return brentq(lambda w: float(g(np.array([w]), K)[0]), W[i], W[i + 1], xtol=1e-13)

    Ks = np.linspace(0.0, 3.0, 61)
    vals = np.array([second_root(K) for K in Ks])
    j = int(np.argmin(vals))
    lo, hi = Ks[max(j - 1, 0)], Ks[min(j + 1, Ks.size - 1)]
    res = minimize_scalar(second_root, bounds=(lo, hi), method="bounded", options={"xatol": 1e-7})
    wmin = min(float(res.fun), vals[j])
    return wmin / (2.0 * np.pi * s0)  # f a / c0 = Ω (cT/c0) / 2π


def second_mode_onset(bar_radius, bar_wave_speed, poisson_ratio):
    """Lowest frequency at which the second longitudinal mode propagates.

    Above it a pulse can carry energy in more than one mode and a
    fundamental-mode correction is no longer the whole story.

    Parameters
    ----------
    bar_radius : float
        Bar radius a [m].
    bar_wave_speed : float
        Bar wave speed c0 [m/s].
    poisson_ratio : float
        Poisson ratio ν [1], in (0, 0.5).

    Returns
    -------
    float
        Onset frequency [Hz]: the minimum over wavenumber of the second
        branch's frequency (it lies below the k = 0 cut-off where that branch
        has a backward-wave region, e.g. f·a/c0 ≈ 0.349 vs 0.380 for ν = 0.29).

    References
    ----------
    .. [1] R. D. Mindlin and H. D. McNiven, "Axially symmetric waves in elastic
       rods", J. Appl. Mech. 27, 145–151 (1960).
    .. [2] A. H. Meitzler, "Backward-wave transmission of stress pulses in
       elastic cylinders and plates", J. Acoust. Soc. Am. 33, 435–445 (1961),
       doi:10.1121/1.1908685 (DOI from memory).
    """
    a = _check_positive(bar_radius, "bar_radius")
    c0 = _check_positive(bar_wave_speed, "bar_wave_speed")
    nu = _check_poisson(poisson_ratio)
    return _second_mode_onset_cached(_cache_key(nu)) * c0 / a


# --------------------------------------------------------------------------
# propagation
# --------------------------------------------------------------------------
def _fast_length(n):
    """Smallest even 2^a 3^b 5^c ≥ n.

    2-3-5 lengths, as scipy.fft.next_fast_len(real=True) gives (its complex
    default also admits 7 and 11, which measured here with pocketfft at ~1e6
    points were 1.5-2x slower), but always even: an even length halves the
    real-FFT work.
    """
    n = max(int(n), 2)
    best = None
    p5 = 1
    while p5 < 2 * n:
        p35 = p5
        while p35 < 2 * n:
            m = p35 * 2
            while m < n:
                m *= 2
            if best is None or m < best:
                best = m
            p35 *= 3
        p5 *= 5
    return best


def _propagation_plan(dt, a, c0, curve, max_frequency, amplitude_factors, amplitude_limit):
    """Frequencies at which the phase velocity is held, and the padding needed."""
    phi_nyq = 0.5 / dt * a / c0
    phi_hold = curve.max_frequency
    if max_frequency is not None:
        phi_hold = min(phi_hold, max_frequency * a / c0)
    phi_top = min(phi_hold, phi_nyq)
    # slowest energy: minimum group velocity over the band used; above the
    # hold frequency the phase velocity is constant, so cg = c there.
    sel = curve.frequency <= phi_top
    cg_min = min(float(np.min(curve.group_ratio[sel])), float(curve.phase_ratio_at(phi_top)))
    amp = _amplitude_table(curve.poisson_ratio, amplitude_limit) if amplitude_factors else None
    return phi_hold, cg_min * c0, amp


def propagate(strain, dt, distance, bar_radius, bar_wave_speed, poisson_ratio, *,
              amplitude_factors=False, max_frequency=None, above_max_frequency="hold",
              amplitude_limit=DEFAULT_AMPLITUDE_LIMIT):
    """Move a bar strain history a distance along the bar, with dispersion.

    Returns the history a gauge ``distance`` further along the wave's
    direction of travel would record, on the same time axis: each Fourier
    component of frequency f is delayed by ``distance / c(f)`` with c(f) the
    Pochhammer–Chree fundamental-mode phase velocity. This includes the bulk
    delay ``distance / c0`` at low frequency; a negative distance moves the
    wave backwards (earlier), e.g. from a gauge to the specimen face of an
    incident wave.

    Parameters
    ----------
    strain : array_like
        Strain history [1], 1-D, uniformly sampled, finite.
    dt : float
        Sample interval [s].
    distance : float
        Signed propagation distance [m] (positive = in the direction of
        travel).
    bar_radius : float
        Bar radius a [m].
    bar_wave_speed : float
        Bar wave speed c0 [m/s], used as given (pass the measured speed).
    poisson_ratio : float
        Poisson ratio ν of the bar [1], in (0, 0.5).
    amplitude_factors : bool, optional
        Also apply the radial amplitude factors: the input is then read as
        the surface axial strain (what a gauge sees) and the output is the
        section-mean axial stress over E, σ̄/E. Per harmonic the factor is
        (mean/surface strain) × (c/c0)²; applied up to a/Λ =
        ``amplitude_limit`` (the mean/surface ratio is singular near
        a/Λ ≈ 0.38), then returned smoothly to 1 over the next 20 % in
        frequency and 1 above: what the factors cannot correct is not
        amplified (noise there would be, by the factor at the limit). Not reversible by
        propagating back: the factors are applied whatever the sign of
        ``distance``. Default False.
    max_frequency : float, optional
        Frequency [Hz] above which the fundamental-mode curve is not used
        (see ``above_max_frequency``). Default: the end of the table
        (a/Λ = 2, f·a/c0 ≈ 1.15 for steel). The first higher mode appears
        from ``second_mode_onset(...)``; pass that to stop there.
    above_max_frequency : {"hold", "lowpass"}, optional
        ``"hold"`` (default): the phase velocity is held at its value at the
        limit, so those components move rigidly with that speed; the result
        is exactly reversible and keeps every component's amplitude.
        ``"lowpass"``: components above the limit are removed, with a
        raised-cosine taper over the top 10 % below it (not reversible).
    amplitude_limit : float, optional
        a/Λ up to which the amplitude factors are applied [1]. Default 0.25;
        must be below 0.9 × the a/Λ where the mode's surface strain vanishes
        (0.377 for ν = 0.29).

    Returns
    -------
    ndarray
        Strain history at the new station [1] (σ̄/E with amplitude factors),
        same length and time axis as ``strain``.

    Raises
    ------
    InputError
        Bad parameters or non-finite strain.

    Notes
    -----
    The record is extended before the FFT so nothing wraps round: after the
    last sample the last value is held for the longest delay spread
    |distance|/cg_min (cg_min the slowest group velocity in the band, +5 %
    and 32 samples), then a raised-cosine bridge returns to the first value,
    which is held for the same span before the record (periodic extension).
    Content entering the window from outside therefore equals the first
    (or, going backwards, the last) sample held constant — a flat baseline —
    and content leaving the window is dropped. The total length is an even
    2-3-5-smooth FFT size. At an even length's Nyquist bin the phase factor
    is rounded to ±1 so the transform stays real and reversible.

    With ν → 0 the phase velocity is c0 up to a/Λ ≈ 0.29 (where, for tiny ν,
    the lowest branch turns onto the surface-wave branch), so a pulse with no
    content above that is moved by a pure (sub-sample) delay ``distance / c0``.

    References
    ----------
    .. [1] P. S. Follansbee and C. Frantz, "Wave propagation in the split
       Hopkinson pressure bar", J. Eng. Mater. Technol. 105, 61–66 (1983),
       doi:10.1115/1.3225620 (DOI from memory).
    .. [2] J. C. Gong, L. E. Malvern and D. A. Jenkins, "Dispersion
       investigation in the split Hopkinson pressure bar", J. Eng. Mater.
       Technol. 112, 309–314 (1990), doi:10.1115/1.2903329 (DOI from memory).
    .. [3] A. Tyas and A. J. Watson, Int. J. Impact Eng. 25, 87–101 (2001),
       doi:10.1016/S0734-743X(00)00031-7 (DOI from memory).
    .. [4] D. Bancroft, Phys. Rev. 59, 588–593 (1941),
       doi:10.1103/PhysRev.59.588 (DOI from memory).
    """
    x = np.asarray(strain, dtype=float)
    if x.ndim != 1 or x.size < 2:
        raise InputError(f"strain must be a 1-D array of at least 2 samples, got shape {x.shape}", "strain")
    if not np.all(np.isfinite(x)):
        bad = int(np.argmax(~np.isfinite(x)))
        raise InputError(f"strain has a non-finite value (first at sample {bad})", "strain")
    dt = _check_positive(dt, "dt")
    try:
        d = float(distance)
    except (TypeError, ValueError):
        raise InputError(f"must be a finite number [m], got {distance!r}", "distance") from None
    if not math.isfinite(d):
        raise InputError(f"must be a finite number [m], got {distance!r}", "distance")
    a = _check_positive(bar_radius, "bar_radius")
    c0 = _check_positive(bar_wave_speed, "bar_wave_speed")
    nu = _check_poisson(poisson_ratio)
    if max_frequency is not None:
        max_frequency = _check_positive(max_frequency, "max_frequency")
    if above_max_frequency not in ("hold", "lowpass"):
        raise InputError(f"must be 'hold' or 'lowpass', got {above_max_frequency!r}", "above_max_frequency")
    if amplitude_factors:
        amplitude_limit = _check_positive(amplitude_limit, "amplitude_limit")
    if d == 0.0 and not amplitude_factors and above_max_frequency == "hold":
        return x.copy()

    curve = normalized_curve(nu)
    phi_hold, cg_min, amp = _propagation_plan(dt, a, c0, curve, max_frequency,
                                              amplitude_factors, amplitude_limit)
    n = x.size
    n_shift = int(math.ceil(1.05 * abs(d) / (cg_min * dt))) + 32
    n_bridge = 32
    length = _fast_length(n + 2 * n_shift + n_bridge)
    n_bridge = length - n - 2 * n_shift
    y = np.empty(length)
    y[:n] = x
    y[n:n + n_shift] = x[-1]
    w = 0.5 * (1.0 - np.cos(np.pi * (np.arange(1, n_bridge + 1) / (n_bridge + 1))))
    y[n + n_shift:n + n_shift + n_bridge] = x[-1] + (x[0] - x[-1]) * w
    y[n + n_shift + n_bridge:] = x[0]

    spec = np.fft.rfft(y)
    phi = np.fft.rfftfreq(length, dt) * (a / c0)  # f a / c0, sorted
    ratio = np.empty_like(phi)
    inside = phi <= phi_hold
    ratio[inside] = curve.phase_ratio_at(phi[inside])
    ratio[~inside] = curve.phase_ratio_at(phi_hold)
    # phase 2π f d / c(f) = 2π (f a/c0) (d/a) / (c/c0)
    phase = (2.0 * np.pi * d / a) * phi / ratio
    factor = np.empty(phase.size, dtype=complex)
    np.cos(phase, out=factor.real)
    np.sin(phase, out=factor.imag)
    np.negative(factor.imag, out=factor.imag)  # delay: exp(−i ω τ)
    if length % 2 == 0:
        factor[-1] = 1.0 if math.cos(phase[-1]) >= 0.0 else -1.0
    if amplitude_factors:
        factor *= _amplitude_factors_at(amp, phi, min(amp.phi_end, phi_hold))
    if above_max_frequency == "lowpass":
        factor *= _lowpass(phi, phi_hold)
    spec *= factor
    return np.fft.irfft(spec, length)[:n]


@dataclass(frozen=True)
class _AmplitudeTable:
    phi_end: float  # f a/c0 at the a/Λ limit
    factor: object  # cubic spline of (mean/surface strain)(c/c0)² against f a/c0


@functools.lru_cache(maxsize=64)
def _amplitude_table(nu, limit):
    """Spline of the combined amplitude factor from 0 to a/Λ = ``limit``.

    A cubic spline (not linear interpolation): piecewise-linear factors have a
    kink at every node, which in time shows as faint echoes at 1/(node
    spacing in frequency).
    """
    from scipy.interpolate import CubicSpline
    curve = _curve_cached(nu, DEFAULT_TABLE_POINTS, DEFAULT_MAX_A_OVER_LAMBDA)
    x, m = curve.a_over_lambda, curve.mean_to_surface
    # first a/Λ where the surface strain changes sign (mean/surface ratio blows up)
    bad = np.nonzero((m <= 0) | np.r_[False, np.diff(m) < 0])[0]
    x_sing = float(x[bad[0]]) if bad.size else math.inf
    if not limit < 0.9 * x_sing:
        raise InputError(f"must be below 0.9 × {x_sing:.3f}, the a/Λ where the surface strain of the "
                         f"fundamental mode vanishes (poisson_ratio {nu}), got {limit:g}", "amplitude_limit")
    K_end = np.array([2.0 * math.pi * limit])
    s_end = _solve_fundamental(K_end, nu)
    r_end = float(s_end[0]) / math.sqrt(2.0 * (1.0 + nu))
    m_end = float(_mean_to_surface(s_end, K_end, nu)[0])
    sel = x < limit - 0.5 * (x[1] - x[0])  # drop a node too close to the end point
    phi = np.r_[curve.frequency[sel], limit * r_end]
    factor = np.r_[m[sel] * curve.phase_ratio[sel] ** 2, m_end * r_end**2]
    return _AmplitudeTable(phi_end=float(phi[-1]), factor=CubicSpline(phi, factor))


#: Above the amplitude factors' limit they return to 1 over this share of the limit's frequency (raised cosine):
#: what they cannot correct is left as it is, not amplified by the factor at the limit.
AMPLITUDE_RETURN = 0.2


def _amplitude_factors_at(amp, phi, phi_end):
    """The amplitude factors at dimensionless frequencies ``phi``: the table's up to ``phi_end``, then back to 1
    over the next :data:`AMPLITUDE_RETURN` of it (a smooth return: a step would ring), 1 above."""
    inside = amp.factor(np.minimum(phi, phi_end))
    u = np.clip((phi - phi_end) / (AMPLITUDE_RETURN * phi_end), 0.0, 1.0)
    return 1.0 + (inside - 1.0) * 0.5 * (1.0 + np.cos(np.pi * u))


def _lowpass(phi, phi_max, taper=0.1):
    """1 below (1 − taper) phi_max, raised-cosine to 0 at phi_max, 0 above."""
    lo = (1.0 - taper) * phi_max
    u = np.clip((phi - lo) / (phi_max - lo), 0.0, 1.0)
    return 0.5 * (1.0 + np.cos(np.pi * u))


def dispersion_info(bar_radius, bar_wave_speed, poisson_ratio, *, distance=None, dt=None,
                    amplitude_factors=False, max_frequency=None, above_max_frequency="hold",
                    amplitude_limit=DEFAULT_AMPLITUDE_LIMIT):
    """Provenance record of a dispersion correction (JSON-ready dict).

    Parameters
    ----------
    bar_radius : float
        Bar radius a [m].
    bar_wave_speed : float
        Bar wave speed c0 [m/s].
    poisson_ratio : float
        Poisson ratio ν [1].
    distance : float, optional
        Propagation distance [m].
    dt : float, optional
        Sample interval [s]; gives the Nyquist frequency.
    amplitude_factors, max_frequency, above_max_frequency, amplitude_limit
        As passed to :func:`propagate`.

    Returns
    -------
    dict
        Keys carry units: ``method``, ``poisson_ratio``, ``bar_radius_m``,
        ``bar_wave_speed_m_per_s``, ``distance_m``, ``table_max_a_over_lambda``,
        ``hold_frequency_Hz`` (phase velocity held above), ``above_max_frequency``,
        ``second_mode_onset_Hz``, ``nyquist_Hz``, ``amplitude_factors``,
        ``amplitude_limit_a_over_lambda``, ``amplitude_limit_Hz``, ``references``.
    """
    a = _check_positive(bar_radius, "bar_radius")
    c0 = _check_positive(bar_wave_speed, "bar_wave_speed")
    nu = _check_poisson(poisson_ratio)
    if amplitude_factors:
        amplitude_limit = _check_positive(amplitude_limit, "amplitude_limit")
    curve = normalized_curve(nu)
    phi_hold = curve.max_frequency
    if max_frequency is not None:
        phi_hold = min(phi_hold, _check_positive(max_frequency, "max_frequency") * a / c0)
    info = {
        "method": "Pochhammer-Chree fundamental-mode phase shift (Follansbee & Frantz 1983)",
        "poisson_ratio": nu,
        "bar_radius_m": a,
        "bar_wave_speed_m_per_s": c0,
        "distance_m": None if distance is None else float(distance),
        "table_max_a_over_lambda": float(curve.a_over_lambda[-1]),
        "hold_frequency_Hz": phi_hold * c0 / a,
        "above_max_frequency": above_max_frequency,
        "second_mode_onset_Hz": second_mode_onset(a, c0, nu),
        "nyquist_Hz": None if dt is None else 0.5 / _check_positive(dt, "dt"),
        "amplitude_factors": bool(amplitude_factors),
        "amplitude_limit_a_over_lambda": amplitude_limit if amplitude_factors else None,
        "amplitude_above_limit": f"back to 1 over {100 * AMPLITUDE_RETURN:g} % above the limit" if amplitude_factors
        else None,
        "amplitude_limit_Hz": None,
        "references": [
            "Bancroft 1941, Phys. Rev. 59:588",
            "Follansbee & Frantz 1983, J. Eng. Mater. Technol. 105:61",
        ],
    }
    if amplitude_factors:
        amp = _amplitude_table(curve.poisson_ratio, amplitude_limit)
        info["amplitude_limit_Hz"] = min(amp.phi_end, phi_hold) * c0 / a
        info["references"].append("Tyas & Watson 2001, Int. J. Impact Eng. 25:87")
    return info


def dispersion_table(bar_radius, bar_wave_speed, poisson_ratio, max_frequency, n=201):
    """Phase and group velocity against frequency, for printing or plotting.

    Parameters
    ----------
    bar_radius : float
        Bar radius a [m].
    bar_wave_speed : float
        Bar wave speed c0 [m/s].
    poisson_ratio : float
        Poisson ratio ν [1].
    max_frequency : float
        Highest frequency [Hz] (the table must reach it: f·a/c0 ≤ table end).
    n : int
        Number of rows, uniform in frequency from 0.

    Returns
    -------
    dict of ndarray
        ``frequency_Hz``, ``a_over_wavelength``, ``phase_velocity_m_per_s``,
        ``group_velocity_m_per_s``.
    """
    a = _check_positive(bar_radius, "bar_radius")
    c0 = _check_positive(bar_wave_speed, "bar_wave_speed")
    fmax = _check_positive(max_frequency, "max_frequency")
    if isinstance(n, bool) or int(n) != n or int(n) < 2:
        raise InputError(f"number of rows must be an integer ≥ 2, got {n!r}", "n")
    f = np.linspace(0.0, fmax, int(n))
    c = phase_velocity(f, a, c0, poisson_ratio)
    cg = group_velocity(f, a, c0, poisson_ratio)
    return {
        "frequency_Hz": f,
        "a_over_wavelength": f * a / c,
        "phase_velocity_m_per_s": c,
        "group_velocity_m_per_s": cg,
    }
