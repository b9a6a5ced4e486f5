"""Constitutive models of flow stress: plain functions on numpy arrays, and a registry.

Every model is a pure function ``f(plastic_strain, [strain_rate], [temperature],
<parameters>, [settings])`` returning the true (von Mises equivalent) flow
stress in Pa. SI inside: stresses and stress-like parameters in Pa, strain
rates in 1/s, temperatures in K. The registry :data:`MODELS` adds, for each
model, its parameter bounds, units, typical values and a ``guess`` of starting
values from data; :mod:`shpb.fit` reads only the registry, so a new model is
one function plus one :class:`ModelSpec` entry (the guess is optional).

Also here: :func:`adiabatic_temperature_rise` (Taylor–Quinney heating), the
only non-model physics the fitting layer needs.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from .errors import InputError

__all__ = [
    "johnson_cook",
    "cowper_symonds",
    "cowper_symonds_factor",
    "zerilli_armstrong_fcc",
    "zerilli_armstrong_bcc",
    "power_law",
    "adiabatic_temperature_rise",
    "ParameterSpec",
    "ModelSpec",
    "MODELS",
    "get_model",
    "evaluate",
]


# --------------------------------------------------------------------------
# Model functions
# --------------------------------------------------------------------------


def johnson_cook(
    plastic_strain,
    strain_rate,
    temperature,
    A,
    B,
    n,
    C,
    m,
    reference_rate=1.0,
    room_temperature=293.15,
    melt_temperature=np.inf,
    *,
    rate_floor=None,
):
    r"""Johnson–Cook flow stress.

    .. math::
        \sigma = (A + B\,\varepsilon_p^{\,n})\,(1 + C \ln \dot\varepsilon^*)\,(1 - T^{*m}),
        \quad \dot\varepsilon^* = \dot\varepsilon/\dot\varepsilon_0,
        \quad T^* = (T - T_r)/(T_m - T_r)

    Parameters
    ----------
    plastic_strain : array_like
        Equivalent (true) plastic strain, ε_p ≥ 0 [1].
    strain_rate : array_like
        Plastic strain rate, > 0 [1/s] (≥ 0 with a positive ``rate_floor``).
    temperature : array_like or None
        Temperature [K]; None: at room temperature, no thermal term (``m``
        and ``melt_temperature`` unused).
    A : float
        Yield stress at the reference rate and room temperature [Pa].
    B : float
        Hardening modulus [Pa].
    n : float
        Hardening exponent [1].
    C : float
        Strain-rate constant [1].
    m : float
        Thermal-softening exponent [1].
    reference_rate : float
        Reference strain rate ε̇0 [1/s]; Johnson & Cook use 1 s⁻¹.
    room_temperature : float
        Reference (room) temperature T_r [K].
    melt_temperature : float
        Melting temperature T_m [K]; only needed when T ≠ T_r.
    rate_floor : float or None
        Lowest strain rate the rate term sees [1/s]: slower rates are raised
        to it before the logarithm. None (default): no floor, the published
        form. See Notes for when to set it (the virtual shot sets it to
        ``reference_rate``).

    Returns
    -------
    numpy.ndarray
        True flow stress [Pa].

    Notes
    -----
    T* is clipped to [0, 1]: below T_r no thermal term is applied (the law is
    only defined for T ≥ T_r; :func:`shpb.fit.fit_curves` refuses such data),
    at and above T_m the strength is zero.

    Rates below the reference rate (decided here, for every caller). The
    published law [1] has no lower limit: for ε̇ < ε̇0 the rate factor
    ``1 + C ln(ε̇/ε̇0)`` falls below 1, and it tends to −∞ as ε̇ → 0. That is
    the default (``rate_floor=None``) and what the fitter uses: a
    quasi-static curve slower than ε̇0 (e.g. 0.001 1/s against ε̇0 = 1 1/s)
    tells the fit about C only through this unclipped form (with a floor it
    would be read as a curve at ε̇0). A caller that must evaluate the law at
    rates down to zero sets ``rate_floor``; with ``rate_floor =
    reference_rate`` there is no rate effect below ε̇0 and the quasi-static
    strength is ``(A + B ε_p^n)(1 − T*^m)``. Finite-element codes commonly do
    this (from memory: the Johnson–Cook rate dependence of the Abaqus user's
    manual takes the rate factor as 1 below ε̇0). :class:`shpb.simulate.JohnsonCookLaw`
    does it, because the virtual shot's return mapping evaluates the flow
    stress at zero plastic rate for its yield check (common practice).

    References
    ----------
    .. [1] G. R. Johnson and W. H. Cook, "A constitutive model and data for
       metals subjected to large strains, high strain rates and high
       temperatures," in Proc. 7th Int. Symp. Ballistics, The Hague, 1983,
       pp. 541–547.
    .. [2] G. R. Johnson and W. H. Cook, "Fracture characteristics of three
       metals subjected to various strains, strain rates, temperatures and
       pressures," Eng. Fract. Mech., vol. 21, pp. 31–48, 1985,
       doi:10.1016/0013-7944(85)90052-9.
    """
    eps = np.asarray(plastic_strain, dtype=float)
    rate = np.asarray(strain_rate, dtype=float)
    if rate_floor is not None:
        rate = np.maximum(rate, rate_floor)
    hardening = A + B * eps**n
    rate_factor = 1.0 + C * np.log(rate / reference_rate)
    if temperature is None:
        return hardening * rate_factor
    T = np.asarray(temperature, dtype=float)
    t_star = np.clip((T - room_temperature) / (melt_temperature - room_temperature), 0.0, 1.0)
    return hardening * rate_factor * (1.0 - t_star**m)


def cowper_symonds_factor(strain_rate, D, q):
    r"""Cowper–Symonds dynamic over static flow-stress ratio, 1 + (ε̇/D)^(1/q).

    Parameters
    ----------
    strain_rate : array_like
        Strain rate, ≥ 0 [1/s].
    D : float
        Rate constant [1/s].
    q : float
        Rate exponent [1].

    Returns
    -------
    numpy.ndarray
        σ_dynamic / σ_static [1].

    References
    ----------
    .. [1] G. R. Cowper and P. S. Symonds, "Strain-hardening and strain-rate
       effects in the impact loading of cantilever beams," Brown University,
       Division of Applied Mathematics, Tech. Rep. 28, 1957.
    .. [2] N. Jones, Structural Impact. Cambridge: Cambridge University Press,
       1989, ch. 8.
    """
    rate = np.asarray(strain_rate, dtype=float)
    return 1.0 + (rate / D) ** (1.0 / q)


def cowper_symonds(plastic_strain, strain_rate, A, B, n, D, q):
    r"""Cowper–Symonds rate scaling of a Ludwik static hardening curve.

    .. math::
        \sigma = (A + B\,\varepsilon_p^{\,n})\,\bigl(1 + (\dot\varepsilon/D)^{1/q}\bigr)

    Parameters
    ----------
    plastic_strain : array_like
        Equivalent (true) plastic strain, ε_p ≥ 0 [1].
    strain_rate : array_like
        Strain rate, ≥ 0 [1/s].
    A : float
        Static yield stress [Pa].
    B : float
        Static hardening modulus [Pa].
    n : float
        Static hardening exponent [1].
    D : float
        Cowper–Symonds rate constant [1/s].
    q : float
        Cowper–Symonds rate exponent [1].

    Returns
    -------
    numpy.ndarray
        True flow stress [Pa].

    Notes
    -----
    The static curve σ_static = A + B ε_pⁿ is Ludwik's hardening law [3]; the
    rate factor is :func:`cowper_symonds_factor` [1], [2]. The model has no
    temperature term.

    References
    ----------
    .. [1] G. R. Cowper and P. S. Symonds, "Strain-hardening and strain-rate
       effects in the impact loading of cantilever beams," Brown University,
       Division of Applied Mathematics, Tech. Rep. 28, 1957.
    .. [2] N. Jones, Structural Impact. Cambridge: Cambridge University Press,
       1989, ch. 8.
    .. [3] P. Ludwik, Elemente der technologischen Mechanik. Berlin:
       Springer, 1909.
    """
    eps = np.asarray(plastic_strain, dtype=float)
    return (A + B * eps**n) * cowper_symonds_factor(strain_rate, D, q)


def zerilli_armstrong_fcc(plastic_strain, strain_rate, temperature, C0, C2, C3, C4):
    r"""Zerilli–Armstrong flow stress for face-centred cubic metals.

    .. math::
        \sigma = C_0 + C_2 \sqrt{\varepsilon_p}\,\exp(-C_3 T + C_4 T \ln\dot\varepsilon)

    Parameters
    ----------
    plastic_strain : array_like
        Equivalent (true) plastic strain, ε_p ≥ 0 [1].
    strain_rate : array_like
        Strain rate, > 0 [1/s]; the logarithm is of ε̇ in s⁻¹, as published.
    temperature : array_like
        Absolute temperature [K].
    C0 : float
        Athermal stress (solute, grain size) [Pa].
    C2 : float
        Hardening amplitude [Pa].
    C3 : float
        Thermal constant [1/K].
    C4 : float
        Thermal-rate constant [1/K].

    Returns
    -------
    numpy.ndarray
        True flow stress [Pa].

    References
    ----------
    .. [1] F. J. Zerilli and R. W. Armstrong, "Dislocation-mechanics-based
       constitutive relations for material dynamics calculations," J. Appl.
       Phys., vol. 61, no. 5, pp. 1816–1825, 1987, doi:10.1063/1.338024.
    """
    eps = np.asarray(plastic_strain, dtype=float)
    rate = np.asarray(strain_rate, dtype=float)
    T = np.asarray(temperature, dtype=float)
    return C0 + C2 * np.sqrt(eps) * np.exp(-C3 * T + C4 * T * np.log(rate))


def zerilli_armstrong_bcc(plastic_strain, strain_rate, temperature, C0, C1, C3, C4, C5, n):
    r"""Zerilli–Armstrong flow stress for body-centred cubic metals.

    .. math::
        \sigma = C_0 + C_1 \exp(-C_3 T + C_4 T \ln\dot\varepsilon) + C_5\,\varepsilon_p^{\,n}

    Parameters
    ----------
    plastic_strain : array_like
        Equivalent (true) plastic strain, ε_p ≥ 0 [1].
    strain_rate : array_like
        Strain rate, > 0 [1/s]; the logarithm is of ε̇ in s⁻¹, as published.
    temperature : array_like
        Absolute temperature [K].
    C0 : float
        Athermal stress (solute, grain size) [Pa].
    C1 : float
        Thermally activated stress amplitude [Pa].
    C3 : float
        Thermal constant [1/K].
    C4 : float
        Thermal-rate constant [1/K].
    C5 : float
        Hardening modulus [Pa].
    n : float
        Hardening exponent [1].

    Returns
    -------
    numpy.ndarray
        True flow stress [Pa].

    References
    ----------
    .. [1] F. J. Zerilli and R. W. Armstrong, "Dislocation-mechanics-based
       constitutive relations for material dynamics calculations," J. Appl.
       Phys., vol. 61, no. 5, pp. 1816–1825, 1987, doi:10.1063/1.338024.
    """
    eps = np.asarray(plastic_strain, dtype=float)
    rate = np.asarray(strain_rate, dtype=float)
    T = np.asarray(temperature, dtype=float)
    return C0 + C1 * np.exp(-C3 * T + C4 * T * np.log(rate)) + C5 * eps**n


def power_law(plastic_strain, strain_rate, K, n, C, reference_rate=1.0):
    r"""Power-law hardening with a logarithmic strain-rate term.

    .. math::
        \sigma = K\,\varepsilon_p^{\,n}\,(1 + C \ln(\dot\varepsilon/\dot\varepsilon_0))

    Parameters
    ----------
    plastic_strain : array_like
        Equivalent (true) plastic strain, ε_p ≥ 0 [1].
    strain_rate : array_like
        Strain rate, > 0 [1/s].
    K : float
        Strength coefficient [Pa].
    n : float
        Hardening exponent [1].
    C : float
        Strain-rate constant [1].
    reference_rate : float
        Reference strain rate ε̇0 [1/s].

    Returns
    -------
    numpy.ndarray
        True flow stress [Pa].

    Notes
    -----
    An empirical combination: the hardening part is Hollomon's power law [1];
    the rate factor is the logarithmic one of Johnson and Cook [2]. The model
    has no temperature term and gives zero stress at zero plastic strain.

    References
    ----------
    .. [1] J. H. Hollomon, "Tensile deformation," Trans. AIME, vol. 162,
       pp. 268–290, 1945.
    .. [2] G. R. Johnson and W. H. Cook, "A constitutive model and data for
       metals subjected to large strains, high strain rates and high
       temperatures," in Proc. 7th Int. Symp. Ballistics, The Hague, 1983,
       pp. 541–547.
    """
    eps = np.asarray(plastic_strain, dtype=float)
    rate = np.asarray(strain_rate, dtype=float)
    return K * eps**n * (1.0 + C * np.log(rate / reference_rate))


def adiabatic_temperature_rise(plastic_strain, stress, density, specific_heat, beta=0.9):
    r"""Adiabatic temperature rise from plastic work, ΔT = β/(ρ c_p) ∫ σ dε_p.

    Parameters
    ----------
    plastic_strain : array_like
        Plastic strain along the curve, increasing [1].
    stress : array_like
        True stress at the same points [Pa].
    density : float
        Specimen density ρ [kg/m³].
    specific_heat : float
        Specific heat capacity c_p [J/(kg·K)].
    beta : float
        Taylor–Quinney coefficient, the fraction of plastic work turned into
        heat [1]; 0.9 is the usual value after [1] (it varies with material
        and strain, e.g. [2]).

    Returns
    -------
    numpy.ndarray
        ΔT at each point [K]. The work before the first point is taken as
        σ[0]·ε_p[0] (a rectangle from ε_p = 0), then the trapezoidal rule.

    References
    ----------
    .. [1] G. I. Taylor and H. Quinney, "The latent energy remaining in a
       metal after cold working," Proc. R. Soc. Lond. A, vol. 143,
       pp. 307–326, 1934, doi:10.1098/rspa.1934.0004.
    .. [2] R. Kapoor and S. Nemat-Nasser, "Determination of temperature rise
       during high strain rate deformation," Mech. Mater., vol. 27,
       pp. 1–12, 1998.
    """
    eps = np.asarray(plastic_strain, dtype=float)
    sig = np.asarray(stress, dtype=float)
    if eps.size == 0:
        return np.zeros(0)
    steps = 0.5 * (sig[1:] + sig[:-1]) * np.diff(eps)
    work = np.concatenate(([sig[0] * max(eps[0], 0.0)], sig[0] * max(eps[0], 0.0) + np.cumsum(steps)))
    return beta * work / (density * specific_heat)


# --------------------------------------------------------------------------
# Starting values from data
# --------------------------------------------------------------------------
#
# A guess receives ``groups``: one (plastic_strain, strain_rate, temperature,
# stress) tuple per curve (rate and temperature scalars or arrays, stress in
# Pa) and the model's settings as keywords; it returns a dict of parameter
# values. Guesses only need to land in the basin of the least-squares
# minimum, so they use simple separable estimates.


def _hardening_fit(eps, sig, with_offset=True):
    """Least-squares A + B eps^n over a grid of n (A, B linear): (A, B, n)."""
    eps = np.asarray(eps, float)
    sig = np.asarray(sig, float)
    ok = (eps > 0) & np.isfinite(sig)
    eps, sig = eps[ok], sig[ok]
    if eps.size < 3:
        return (float(np.mean(sig)) if sig.size else 1e8), 0.0, 0.3
    best = None
    for n in np.linspace(0.05, 1.2, 47):
        x = eps**n
        M = np.column_stack([np.ones_like(x), x]) if with_offset else x[:, None]
        coef, *_ = np.linalg.lstsq(M, sig, rcond=None)
        if with_offset:
            a, b = coef
        else:
            a, b = 0.0, coef[0]
        a, b = max(a, 0.0), max(b, 0.0)
        cost = np.sum((a + b * x - sig) ** 2)
        if best is None or cost < best[0]:
            best = (cost, a, b, n)
    _, a, b, n = best
    if b == 0.0:  # flat curve: keep a small positive hardening to start from
        b = 0.05 * max(a, 1.0)
    return float(a), float(b), float(n)


def _group_stats(groups):
    """Per-curve scalars: (rate, initial temperature)."""
    rates = np.array([float(np.mean(g[1])) for g in groups])
    temps = np.array([float(np.min(g[2])) for g in groups])
    return rates, temps


def _pick_reference(groups, reference_rate, room_temperature):
    """Index of the curve closest to the reference rate and room temperature."""
    rates, temps = _group_stats(groups)
    score = np.abs(np.log(rates / reference_rate)) + np.abs(temps - room_temperature) / 50.0
    return int(np.argmin(score))


def _median_ratio(g, model_values):
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.asarray(g[3], float) / model_values
    r = r[np.isfinite(r)]
    return float(np.median(r)) if r.size else 1.0


def _guess_johnson_cook(groups, reference_rate=1.0, room_temperature=293.15, melt_temperature=np.inf):
    ref = _pick_reference(groups, reference_rate, room_temperature)
    a0, b0, n = _hardening_fit(groups[ref][0], groups[ref][3])
    rates, temps = _group_stats(groups)
    lnr = np.log(rates / reference_rate)
    tstar = np.clip((temps - room_temperature) / (melt_temperature - room_temperature), 0.0, 1.0)
    # Flow-stress factor of each curve relative to the reference curve's hardening:
    # f = (1 + C lnr) / (1 + C lnr_ref) at the reference temperature, a line in lnr
    # whose intercept is scale = 1 / (1 + C lnr_ref) and slope C * scale.
    f = np.array([_median_ratio(g, a0 + b0 * np.asarray(g[0]) ** n) for g in groups])
    near_ref_T = np.abs(temps - temps[ref]) < 5.0
    C, scale = 0.0, 1.0
    if len(np.unique(np.round(lnr[near_ref_T], 1))) >= 2:
        slope, intercept = np.polyfit(lnr[near_ref_T], f[near_ref_T], 1)
        if intercept > 0:
            C, scale = float(np.clip(slope / intercept, 0.0, 0.5)), float(intercept)
    m = 1.0
    for _ in range(3):  # the reference curve may itself be above room temperature
        # a0 = A (1 + C lnr_ref) theta_ref, so A = a0 * scale / theta_ref (likewise B)
        theta_ref = 1.0 - tstar[ref] ** m
        A, B = a0 * scale / max(theta_ref, 0.05), b0 * scale / max(theta_ref, 0.05)
        hot = tstar > 0.01
        if not np.any(hot):
            break
        g = f[hot] * a0 / (A * (1.0 + C * lnr[hot]))  # the thermal factor 1 - T*^m of each hot curve
        g = np.clip(g, 0.02, 0.98)
        m = float(np.clip(np.median(np.log(1.0 - g) / np.log(tstar[hot])), 0.2, 3.0))
    return {"A": A, "B": B, "n": n, "C": C, "m": m}


def _guess_power_law(groups, reference_rate=1.0):
    ref = _pick_reference(groups, reference_rate, 0.0)
    _, K0, n = _hardening_fit(groups[ref][0], groups[ref][3], with_offset=False)
    rates, _ = _group_stats(groups)
    lnr = np.log(rates / reference_rate)
    f = np.array([_median_ratio(g, K0 * np.asarray(g[0]) ** n) for g in groups])
    C, scale = 0.0, 1.0
    if len(np.unique(np.round(lnr, 1))) >= 2:
        slope, intercept = np.polyfit(lnr, f, 1)
        if intercept > 0:
            C, scale = float(np.clip(slope / intercept, 0.0, 0.5)), float(intercept)
    return {"K": K0 * scale, "n": n, "C": C}  # K0 = K (1 + C lnr_ref), scale = 1 / (1 + C lnr_ref)


def _guess_cowper_symonds(groups):
    rates, _ = _group_stats(groups)
    low = int(np.argmin(rates))
    A0, B0, n = _hardening_fit(groups[low][0], groups[low][3])
    f = np.array([_median_ratio(g, A0 + B0 * np.asarray(g[0]) ** n) for g in groups])
    # Take the slowest curve as nearly static; excess factor (f - 1) = (rate/D)^(1/q).
    up = (f > 1.02) & (rates > 0)
    q, D = 5.0, float(max(rates.max(), 1.0))
    if np.count_nonzero(up) >= 2 and np.ptp(np.log(rates[up])) > 0.5:
        slope, intercept = np.polyfit(np.log(rates[up]), np.log(f[up] - 1.0), 1)
        if slope > 0:
            q = float(np.clip(1.0 / slope, 1.0, 20.0))
            D = float(np.exp(-intercept * q))
    elif np.any(up):
        i = np.flatnonzero(up)[-1]
        D = float(rates[i] / (f[i] - 1.0) ** q)
    D = float(np.clip(D, 1e-3, 1e9))
    static = 1.0 + (rates[low] / D) ** (1.0 / q)  # the slowest curve is not quite static
    return {"A": A0 / static, "B": B0 / static, "n": n, "D": D, "q": q}


def _log_regression(y, columns, defaults):
    """Least squares y = sum(c_k * col_k) on columns with spread; others keep defaults."""
    names = list(columns)
    out = dict(defaults)
    keep = [k for k in names if k == "const" or np.ptp(columns[k]) > 1e-9 * max(1.0, np.max(np.abs(columns[k])))]
    y_adj = y - sum(defaults.get(k, 0.0) * columns[k] for k in names if k not in keep)
    coef, *_ = np.linalg.lstsq(np.column_stack([columns[k] for k in keep]), y_adj, rcond=None)
    out.update(dict(zip(keep, coef)))
    return out


def _guess_zerilli_armstrong_fcc(groups):
    # Per curve sigma = a + b sqrt(eps): athermal C0 from the intercepts, then
    # ln b = ln C2 - C3 T + C4 T ln(rate) by linear regression.
    ab = []
    for g in groups:
        x = np.sqrt(np.asarray(g[0], float))
        b, a = np.polyfit(x, np.asarray(g[3], float), 1)
        ab.append((a, b))
    ab = np.array(ab)
    C0 = float(max(np.median(ab[:, 0]), 0.0))
    rates, temps = _group_stats(groups)
    amp = np.array([max(float(np.median((np.asarray(g[3]) - C0) / np.sqrt(np.maximum(g[0], 1e-12)))), 1.0) for g in groups])
    c = _log_regression(
        np.log(amp),
        {"const": np.ones_like(temps), "mC3": -temps, "C4": temps * np.log(rates)},
        {"const": 0.0, "mC3": 0.002, "C4": 1e-4},
    )
    C3 = float(np.clip(c["mC3"], 0.0, 0.05))
    C4 = float(np.clip(c["C4"], 0.0, 0.01))
    C2 = float(np.exp(np.mean(np.log(amp) + C3 * temps - C4 * temps * np.log(rates))))
    return {"C0": C0, "C2": C2, "C3": C3, "C4": C4}


def _guess_zerilli_armstrong_bcc(groups):
    # Common hardening C5 eps^n with one intercept per curve; the intercepts
    # carry C0 + C1 exp(-C3 T + C4 T ln rate).
    best = None
    k = len(groups)
    for n in np.linspace(0.05, 1.0, 39):
        rows, ys = [], []
        for i, g in enumerate(groups):
            e = np.asarray(g[0], float)
            M = np.zeros((e.size, k + 1))
            M[:, i] = 1.0
            M[:, k] = e**n
            rows.append(M)
            ys.append(np.asarray(g[3], float))
        M, y = np.vstack(rows), np.concatenate(ys)
        coef, *_ = np.linalg.lstsq(M, y, rcond=None)
        cost = float(np.sum((M @ coef - y) ** 2))
        if coef[k] > 0 and (best is None or cost < best[0]):
            best = (cost, n, coef)
    if best is None:
        n, coef = 0.3, np.r_[[np.mean(g[3]) for g in groups], 0.1 * np.mean(groups[0][3])]
    else:
        _, n, coef = best
    intercepts = np.maximum(coef[:k], 1.0)
    rates, temps = _group_stats(groups)
    C0 = 0.0  # athermal part: start at zero and let the fit raise it
    c = _log_regression(
        np.log(intercepts - C0),
        {"const": np.ones_like(temps), "mC3": -temps, "C4": temps * np.log(rates)},
        {"const": 0.0, "mC3": 0.005, "C4": 3e-4},
    )
    C3 = float(np.clip(c["mC3"], 0.0, 0.05))
    C4 = float(np.clip(c["C4"], 0.0, 0.01))
    C1 = float(np.exp(np.mean(np.log(intercepts) + C3 * temps - C4 * temps * np.log(rates))))
    return {"C0": C0, "C1": C1, "C3": C3, "C4": C4, "C5": float(coef[k]), "n": float(n)}


# --------------------------------------------------------------------------
# Registry
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class ParameterSpec:
    """One model parameter: unit, bounds, typical value and identifiability needs.

    Attributes
    ----------
    name : str
        Argument name in the model function.
    unit : str
        SI unit of the value (``"Pa"``, ``"1"``, ``"1/s"``, ``"1/K"``).
    description : str
        What the parameter means.
    min, max : float
        Bounds. For ``stress_scaled`` parameters they are multiples of the
        largest measured stress, so bounds follow the material's strength.
    hint : float
        Typical value (a multiple of the largest stress if ``stress_scaled``),
        the start when a model has no guess.
    stress_scaled : bool
        Bounds and hint scale with the data's stress level.
    log_scale : bool
        Fit log10 of the value (for constants spanning decades, e.g. D).
    report_unit : str
        Unit in output keys (``"MPa"``); the value is divided by
        ``report_scale``.
    report_scale : float
        SI value per reported unit (1e6 for MPa).
    identified_by : str
        What the data must vary for the parameter to be identifiable:
        ``"rates"`` (strain-rate levels), ``"temperatures"`` (temperature
        levels), ``"conditions"`` (distinct rate–temperature pairs) or ``""``
        (any single curve). k free parameters of one kind need k + 1 levels.
    default : float or None
        Value to fix the parameter at when the data cannot identify it;
        ``None``: the user must give a value or the fit fails.
    """

    name: str
    unit: str
    description: str
    min: float
    max: float
    hint: float
    stress_scaled: bool = False
    log_scale: bool = False
    report_unit: str = ""
    report_scale: float = 1.0
    identified_by: str = ""
    default: float | None = None

    @property
    def report_key(self) -> str:
        """Output key with the unit in the name (``"A_MPa"``, ``"n"``)."""
        unit = self.report_unit or {"1": "", "Pa": "Pa", "1/s": "per_s", "1/K": "per_K"}.get(self.unit, self.unit)
        return f"{self.name}_{unit}" if unit else self.name


@dataclass(frozen=True)
class ModelSpec:
    """A constitutive model for the fitting layer.

    Attributes
    ----------
    name : str
        Registry key (``"johnson-cook"``).
    function : callable
        The model function; stress in Pa.
    parameters : tuple of ParameterSpec
        Fitted parameters, in signature order.
    variables : tuple of str
        Independent variables the function takes, from
        ``("plastic_strain", "strain_rate", "temperature")``.
    settings : tuple of str
        Fixed inputs that are not fitted (``reference_rate``,
        ``room_temperature``, ``melt_temperature``), SI.
    equation : str
        The model equation, plain text.
    reference : str
        Short citation.
    guess : callable or None
        ``guess(groups, **settings) -> dict`` of starting values.
    """

    name: str
    function: Callable
    parameters: tuple
    variables: tuple
    settings: tuple = ()
    equation: str = ""
    reference: str = ""
    guess: Callable | None = None
    notes: tuple = field(default_factory=tuple)

    @property
    def parameter_names(self) -> list[str]:
        return [p.name for p in self.parameters]

    def parameter(self, name: str) -> ParameterSpec:
        for p in self.parameters:
            if p.name == name:
                return p
        raise InputError(f"model {self.name!r} has no parameter {name!r} (has {', '.join(self.parameter_names)})")


_MPA = dict(report_unit="MPa", report_scale=1e6, stress_scaled=True)

_JC = ModelSpec(
    name="johnson-cook",
    function=johnson_cook,
    parameters=(
        ParameterSpec("A", "Pa", "yield stress at the reference rate and room temperature", 0.0, 3.0, 0.5, **_MPA),
        ParameterSpec("B", "Pa", "hardening modulus", 0.0, 30.0, 0.5, **_MPA),
        ParameterSpec("n", "1", "hardening exponent", 0.01, 1.5, 0.3),
        ParameterSpec("C", "1", "strain-rate constant", -0.05, 0.5, 0.02, identified_by="rates", default=0.0),
        ParameterSpec("m", "1", "thermal-softening exponent", 0.05, 5.0, 1.0, identified_by="temperatures", default=1.0),
    ),
    variables=("plastic_strain", "strain_rate", "temperature"),
    settings=("reference_rate", "room_temperature", "melt_temperature"),
    equation="sigma = (A + B*eps_p^n) * (1 + C*ln(rate/reference_rate)) * (1 - T*^m), "
    "T* = (T - room_temperature)/(melt_temperature - room_temperature)",
    reference="Johnson & Cook 1983, Proc. 7th Int. Symp. Ballistics, pp. 541-547",
    guess=_guess_johnson_cook,
)

_CS = ModelSpec(
    name="cowper-symonds",
    function=cowper_symonds,
    parameters=(
        ParameterSpec("A", "Pa", "static yield stress", 0.0, 3.0, 0.5, **_MPA),
        ParameterSpec("B", "Pa", "static hardening modulus", 0.0, 30.0, 0.5, **_MPA),
        ParameterSpec("n", "1", "static hardening exponent", 0.01, 1.5, 0.3),
        ParameterSpec("D", "1/s", "rate constant", 1e-4, 1e10, 1e3, log_scale=True, identified_by="rates"),
        ParameterSpec("q", "1", "rate exponent", 0.5, 30.0, 5.0, identified_by="rates"),
    ),
    variables=("plastic_strain", "strain_rate"),
    equation="sigma = (A + B*eps_p^n) * (1 + (rate/D)^(1/q))",
    reference="Cowper & Symonds 1957, Brown Univ. TR 28; Jones 1989, Structural Impact, ch. 8",
    guess=_guess_cowper_symonds,
    notes=("no temperature term",),
)

_ZA_FCC = ModelSpec(
    name="zerilli-armstrong-fcc",
    function=zerilli_armstrong_fcc,
    parameters=(
        ParameterSpec("C0", "Pa", "athermal stress", 0.0, 3.0, 0.1, **_MPA),
        ParameterSpec("C2", "Pa", "hardening amplitude", 0.0, 100.0, 3.0, **_MPA),
        ParameterSpec("C3", "1/K", "thermal constant", 0.0, 0.05, 0.002, identified_by="temperatures"),
        ParameterSpec("C4", "1/K", "thermal-rate constant", -0.001, 0.01, 1e-4, identified_by="rates", default=0.0),
    ),
    variables=("plastic_strain", "strain_rate", "temperature"),
    equation="sigma = C0 + C2*sqrt(eps_p)*exp(-C3*T + C4*T*ln(rate))",
    reference="Zerilli & Armstrong 1987, J. Appl. Phys. 61:1816, doi:10.1063/1.338024",
    guess=_guess_zerilli_armstrong_fcc,
)

_ZA_BCC = ModelSpec(
    name="zerilli-armstrong-bcc",
    function=zerilli_armstrong_bcc,
    parameters=(
        ParameterSpec("C0", "Pa", "athermal stress", 0.0, 3.0, 0.05, identified_by="conditions", default=0.0, **_MPA),
        ParameterSpec("C1", "Pa", "thermally activated stress amplitude", 0.0, 100.0, 2.0, **_MPA),
        ParameterSpec("C3", "1/K", "thermal constant", 0.0, 0.05, 0.005, identified_by="temperatures"),
        ParameterSpec("C4", "1/K", "thermal-rate constant", -0.001, 0.01, 3e-4, identified_by="rates", default=0.0),
        ParameterSpec("C5", "Pa", "hardening modulus", 0.0, 30.0, 0.5, **_MPA),
        ParameterSpec("n", "1", "hardening exponent", 0.01, 1.5, 0.3),
    ),
    variables=("plastic_strain", "strain_rate", "temperature"),
    equation="sigma = C0 + C1*exp(-C3*T + C4*T*ln(rate)) + C5*eps_p^n",
    reference="Zerilli & Armstrong 1987, J. Appl. Phys. 61:1816, doi:10.1063/1.338024",
    guess=_guess_zerilli_armstrong_bcc,
)

_PL = ModelSpec(
    name="power-law",
    function=power_law,
    parameters=(
        ParameterSpec("K", "Pa", "strength coefficient", 0.0, 30.0, 1.5, **_MPA),
        ParameterSpec("n", "1", "hardening exponent", 0.01, 1.5, 0.2),
        ParameterSpec("C", "1", "strain-rate constant", -0.05, 0.5, 0.02, identified_by="rates", default=0.0),
    ),
    variables=("plastic_strain", "strain_rate"),
    settings=("reference_rate",),
    equation="sigma = K*eps_p^n * (1 + C*ln(rate/reference_rate))",
    reference="power-law (Hollomon 1945) hardening with a logarithmic rate term",
    guess=_guess_power_law,
    notes=("no temperature term",),
)

#: Registry of models by name.
MODELS: dict[str, ModelSpec] = {s.name: s for s in (_JC, _CS, _ZA_FCC, _ZA_BCC, _PL)}


def get_model(name) -> ModelSpec:
    """Look a model up by name (or pass a :class:`ModelSpec` through).

    Raises
    ------
    InputError
        Unknown name; the message lists the known models.
    """
    if isinstance(name, ModelSpec):
        return name
    key = str(name).strip().lower().replace("_", "-")
    if key not in MODELS:
        raise InputError(f"unknown model {name!r}; expected one of: {', '.join(MODELS)}", "model")
    return MODELS[key]


def evaluate(model, params: dict, plastic_strain, strain_rate=None, temperature=None, **settings):
    """Evaluate a registered model with parameters and settings given by name (SI).

    Parameters
    ----------
    model : str or ModelSpec
        Model name or spec.
    params : dict
        Parameter values [SI: Pa, 1, 1/s, 1/K].
    plastic_strain, strain_rate, temperature : array_like
        Independent variables [1], [1/s], [K]; those the model does not use
        are ignored.
    **settings
        Model settings (``reference_rate`` [1/s], ``room_temperature`` [K],
        ``melt_temperature`` [K]); unknown keys are ignored.

    Returns
    -------
    numpy.ndarray
        Flow stress [Pa].
    """
    spec = get_model(model)
    values = {"plastic_strain": plastic_strain, "strain_rate": strain_rate, "temperature": temperature}
    kwargs = {v: values[v] for v in spec.variables}
    kwargs.update({p: params[p] for p in spec.parameter_names})
    kwargs.update({k: v for k, v in settings.items() if k in spec.settings and v is not None})
    return spec.function(**kwargs)
