"""What the one-dimensional analysis leaves out of the specimen: its inertia and the friction at its faces.

The Kolsky analysis takes the specimen's stress from a face force. Two
effects bias it, and neither is seen in the bar signals:

* **Inertia.** Accelerating the specimen's material takes force: axially (the
  front face pushes harder than the back face while the strain rate rises)
  and radially (the material flows outwards). Davies & Hunter (1963) wrote
  the energy balance of a cylinder with a uniform strain rate and found, for
  the stress of the specimen's material against the back-face stress,

      σ_s = σ_2 + ρ (L²/6 − ν² D²/8) d²ε/dt²,

  which vanishes for L/D = √3 ν / 2 (about 0.43 at ν = 0.5, the origin of
  the usual L/D ≈ 0.5). Gorham (1989) kept the terms Davies & Hunter
  dropped: the back face's own acceleration, the current dimensions and the
  radial term of a changing radius (ε̇², from memory). The same energy
  balance written out with them (engineering stress and strain, volume
  constant, a linear axial velocity field and radial velocity ν λ r, with λ
  the true strain rate) gives, for the back-face (one-wave) stress,

      Δσ = ρ L0 a_2 / 2 + ρ L0² ë / 6 − ρ ν² D0² (λ̇ + ν λ²) / (8 (1 − e)²),

  for the front-face (two-wave) stress −ρ L0 a_1 / 2 + ρ L0² ë / 6 − (radial),
  and for their mean (three-wave) −ρ L0² ë / 12 − (radial); e and ë are the
  engineering strain and the derivative of its rate, a_1, a_2 the face
  accelerations. Both corrections hold once the specimen's strain is uniform
  (a few wave transits); they are estimates **reported beside** the stress,
  never applied to it.

* **Friction.** Friction at the bar faces resists the specimen's radial flow,
  so the mean axial stress needed to compress it exceeds the material's flow
  stress. For Coulomb friction μ the slab analysis of upsetting gives the
  mean pressure p̄ = σ0 (1 + μ D / (3 L)) to first order in μ D / L (Siebel
  1923, as given by Dieter 1986, ch. 19; from memory), D and L the current
  diameter and length. μ cannot be measured from the bar signals: the user
  gives it and the stress without friction is reported as a band, from the
  reported stress (μ = 0) down to the stress divided by that factor.

References
----------
.. [1] E. D. H. Davies and S. C. Hunter, "The dynamic compression testing of
   solids by the method of the split Hopkinson pressure bar", J. Mech. Phys.
   Solids 11 (1963) 155-179, doi:10.1016/0022-5096(63)90050-4 (from memory).
.. [2] D. A. Gorham, "Specimen inertia in high strain-rate compression",
   J. Phys. D: Appl. Phys. 22 (1989) 1888-1893, doi:10.1088/0022-3727/22/12/014
   (from memory).
.. [3] E. Siebel, "Grundlagen zur Berechnung des Kraft- und Arbeitsbedarfs
   beim Schmieden und Walzen", Stahl und Eisen 43 (1923) 1295-1298 (from memory).
.. [4] G. E. Dieter, Mechanical Metallurgy, 3rd ed., McGraw-Hill, 1986,
   ch. 19 (forging: friction hill in upsetting a cylinder) (from memory).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Optional

import numpy as np
from numpy.typing import ArrayLike

if TYPE_CHECKING:  # pragma: no cover
    from .kolsky import KolskyCurves
    from .pulses import WindowPlan
    from .setup import AnalysisOptions, Specimen

#: Largest inertia correction, as a fraction of the stress, before the flag ``inertia_large`` (5 %: the
#: imbalance the usual force-equilibrium test accepts, Ravichandran & Subhash 1994).
INERTIA_LIMIT = 0.05
#: Poisson ratio of the specimen in the radial inertia terms when none is given: 0.5, plastic flow at constant
#: volume (common practice).
PLASTIC_POISSON_RATIO = 0.5


# --------------------------------------------------------------------------- the published forms
def davies_hunter_terms(strain_rate_derivative: ArrayLike, specimen_length: float, specimen_diameter: float,
                        density: float, poisson_ratio: float = PLASTIC_POISSON_RATIO) -> tuple[np.ndarray, np.ndarray]:
    """The axial and radial inertia terms of Davies & Hunter (1963) [Pa].

    σ_s = σ_2 + axial + radial, with axial = ρ L² ë / 6 and
    radial = −ρ ν² D² ë / 8 (σ_2 the back-face stress, compression positive).

    Parameters
    ----------
    strain_rate_derivative : array_like
        ë, the time derivative of the specimen's engineering strain rate [1/s²].
    specimen_length, specimen_diameter : float
        L and D [m].
    density : float
        Specimen density ρ [kg/m³].
    poisson_ratio : float
        Specimen Poisson ratio ν [1] (0.5 in plastic flow).

    Returns
    -------
    axial, radial : ndarray
        [Pa].

    References
    ----------
    .. [1] E. D. H. Davies and S. C. Hunter, J. Mech. Phys. Solids 11 (1963) 155-179 (from memory).
    """
    rate_dot = np.asarray(strain_rate_derivative, dtype=float)
    axial = density * specimen_length ** 2 * rate_dot / 6.0
    radial = -density * poisson_ratio ** 2 * specimen_diameter ** 2 * rate_dot / 8.0
    return axial, radial


def gorham_correction(strain: ArrayLike, strain_rate: ArrayLike, strain_rate_derivative: ArrayLike,
                      face_acceleration: ArrayLike, specimen_length: float, specimen_diameter: float, density: float,
                      poisson_ratio: float = PLASTIC_POISSON_RATIO, stress_form: str = "1-wave") -> np.ndarray:
    """Inertia correction of a Kolsky stress in the fuller form (Gorham 1989) [Pa]: add it to get σ_s.

    Δσ = ±ρ L0 a / 2 + k ρ L0² ë − ρ ν² D0² (λ̇ + ν λ²) / (8 (1 − e)²), with
    λ = ė / (1 − e) the true strain rate and λ̇ its derivative; for the
    back-face (``1-wave``) stress a = a_2 (sign +) and k = 1/6, for the
    front-face (``2-wave``) stress a = a_1 (sign −) and k = 1/6, for their
    mean (``3-wave``) no face term and k = −1/12 (module notes).

    Parameters
    ----------
    strain, strain_rate, strain_rate_derivative : array_like
        Engineering strain e [1], its rate ė [1/s] and the rate's derivative ë [1/s²].
    face_acceleration : array_like
        Acceleration of the face whose force gives the stress [m/s²] (a_2 of
        the back face for ``1-wave``, a_1 of the front face for ``2-wave``;
        unused for ``3-wave``), positive towards the transmitted bar.
    specimen_length, specimen_diameter : float
        Initial L0 and D0 [m].
    density : float
        ρ [kg/m³].
    poisson_ratio : float
        ν [1] of the radial flow.
    stress_form : str
        ``1-wave``, ``2-wave`` or ``3-wave``.

    Returns
    -------
    ndarray
        Δσ [Pa], engineering.

    References
    ----------
    .. [1] D. A. Gorham, J. Phys. D: Appl. Phys. 22 (1989) 1888-1893 (from memory).
    .. [2] E. D. H. Davies and S. C. Hunter, J. Mech. Phys. Solids 11 (1963) 155-179 (from memory).
    """
    e, rate, rate_dot = (np.asarray(x, dtype=float) for x in (strain, strain_rate, strain_rate_derivative))
    acc = np.asarray(face_acceleration, dtype=float)
    rho, L0, D0, nu = density, specimen_length, specimen_diameter, poisson_ratio
    stretch = 1.0 - e
    true_rate = rate / stretch
    true_rate_dot = rate_dot / stretch + rate ** 2 / stretch ** 2
    radial = rho * nu ** 2 * D0 ** 2 * (true_rate_dot + nu * true_rate ** 2) / (8.0 * stretch ** 2)
    if stress_form == "1-wave":
        axial = rho * L0 * acc / 2.0 + rho * L0 ** 2 * rate_dot / 6.0
    elif stress_form == "2-wave":
        axial = -rho * L0 * acc / 2.0 + rho * L0 ** 2 * rate_dot / 6.0
    elif stress_form == "3-wave":
        axial = -rho * L0 ** 2 * rate_dot / 12.0
    else:
        from .errors import InputError

        raise InputError(f"expected 1-wave, 2-wave or 3-wave, got {stress_form!r}", "stress_form")
    return axial - radial


def friction_factor(friction_coefficient: float, specimen_length: float, specimen_diameter: float,
                    strain: ArrayLike = 0.0) -> np.ndarray:
    """Mean axial stress over flow stress of a cylinder compressed between faces with Coulomb friction.

    f = 1 + μ D / (3 L) (Siebel 1923; Dieter 1986, ch. 19), with the current
    dimensions at engineering strain e and constant volume: L = L0 (1 − e),
    D = D0 / sqrt(1 − e), so D / L = (D0 / L0) (1 − e)^(−3/2).

    Parameters
    ----------
    friction_coefficient : float
        μ [1].
    specimen_length, specimen_diameter : float
        Initial L0 and D0 [m].
    strain : array_like
        Engineering strain e [1] (compression positive).

    Returns
    -------
    ndarray
        f [1] >= 1: the measured stress is about f times the friction-free one.

    References
    ----------
    .. [1] E. Siebel, Stahl und Eisen 43 (1923) 1295-1298 (from memory).
    .. [2] G. E. Dieter, Mechanical Metallurgy, 3rd ed., 1986, ch. 19 (from memory).
    """
    e = np.clip(np.asarray(strain, dtype=float), 0.0, 0.99)
    return 1.0 + friction_coefficient * specimen_diameter / (3.0 * specimen_length) * (1.0 - e) ** -1.5


def rate_derivative(values: ArrayLike, dt: float, window: float) -> np.ndarray:
    """Time derivative of a sampled history, smoothed over ``window`` seconds [unit/s].

    The slope of the least-squares line (or quadratic: for the centre sample
    the two give the same first derivative) through each run of ``window``
    seconds of samples, the Savitzky–Golay derivative filter with weights
    k / Σk², k = −m .. m; the first and last m samples take the nearest
    full window's value. The smoothing keeps recorder noise out of what is a
    second derivative of the strain.

    References
    ----------
    .. [1] A. Savitzky and M. J. E. Golay, Anal. Chem. 36 (1964) 1627-1639, doi:10.1021/ac60214a047.
    """
    x = np.asarray(values, dtype=float)
    m = max(2, int(round(0.5 * window / dt)))
    if x.size < 2 * m + 1:
        return np.gradient(x, dt) if x.size > 1 else np.zeros_like(x)
    k = np.arange(-m, m + 1, dtype=float)
    inner = np.convolve(x, k[::-1] / (np.sum(k * k) * dt), mode="valid")
    return np.concatenate([np.full(m, inner[0]), inner, np.full(m, inner[-1])])


# --------------------------------------------------------------------------- the stage
@dataclass(frozen=True)
class SpecimenCorrections:
    """Stage 6 of a reduction: inertia and friction estimates, reported beside the stress, never applied.

    Attributes
    ----------
    inertia_davies_hunter : ndarray or None
        The one-wave stress with the Davies & Hunter terms added [Pa] (None
        without the specimen's density).
    inertia_gorham : ndarray or None
        The reported stress with the fuller (Gorham) correction added [Pa].
    friction : ndarray or None
        The reported stress over the friction factor [Pa]: the friction-free
        end of the band (None without a friction coefficient).
    results : dict
        Scalars, units in the keys.
    flags : tuple of Flag
    parameters : dict
        What was used (provenance).
    """

    inertia_davies_hunter: Optional[np.ndarray]
    inertia_gorham: Optional[np.ndarray]
    friction: Optional[np.ndarray]
    results: dict = field(default_factory=dict)
    flags: tuple = ()
    parameters: dict = field(default_factory=dict)

    #: Curves columns, as the result table names them.
    COLUMNS = {"stress_inertia_dh_MPa": "inertia_davies_hunter", "stress_inertia_gorham_MPa": "inertia_gorham",
               "stress_friction_MPa": "friction"}

    def columns(self, n: int) -> dict:
        """The curves columns [MPa] (NaN where not estimated), ``n`` samples each."""
        return {name: (np.full(n, np.nan) if getattr(self, attr) is None else getattr(self, attr) / 1e6)
                for name, attr in self.COLUMNS.items()}

    @property
    def provenance(self) -> dict:
        return {"step": "specimen corrections", "parameters": self.parameters}


def specimen_corrections(curves: "KolskyCurves", plan: "WindowPlan", specimen: "Specimen",
                         analysis: "AnalysisOptions", valid: ArrayLike, dt: float) -> SpecimenCorrections:
    """Stage 6: the inertia corrections (with the specimen's density) and the friction band (with ``μ``).

    The strain rate's and the face velocities' derivatives are taken over a
    Savitzky–Golay window of two specimen wave transits (when its modulus is
    known), 5 % of the pulse, or 1 µs, whichever is longest: the corrections
    assume a uniform strain, which holds only on that time scale. The largest
    correction is reported as a fraction of the stress over the valid part
    (or, with none, over the loading part, :func:`shpb.validity.loading_region`),
    where the stress is at least 10 % of its peak there; above
    :data:`INERTIA_LIMIT` the flag ``inertia_large`` says so.

    Returns
    -------
    SpecimenCorrections
    """
    from .validity import Flag, loading_region

    valid = np.asarray(valid, dtype=bool)
    stress, stress_1 = curves.stress, curves.stress_by_form["1-wave"]
    mask = valid.copy()
    if not mask.any():  # no valid part (inertia itself may break equilibrium): the loading part
        region = loading_region(curves.strain_rate, 0.5 * (curves.force_front + curves.force_back))
        if region is not None:
            mask[region[0]:region[1]] = True
    results, flags, params = {}, [], {}
    dh = gorham = friction = None
    if specimen.density:
        nu = specimen.poisson_ratio if specimen.poisson_ratio is not None else PLASTIC_POISSON_RATIO
        window = max(2 * (specimen.transit_time or 0.0), 0.05 * plan.duration, 1e-6)
        rate_dot = rate_derivative(curves.strain_rate, dt, window)
        axial, radial = davies_hunter_terms(rate_dot, specimen.length, specimen.diameter, specimen.density, nu)
        dh = stress_1 + axial + radial
        velocity = curves.velocity_back if curves.stress_form == "1-wave" else curves.velocity_front
        delta = gorham_correction(curves.strain, curves.strain_rate, rate_dot, rate_derivative(velocity, dt, window),
                                  specimen.length, specimen.diameter, specimen.density, nu, curves.stress_form)
        gorham = stress + delta
        fractions = {"dh": _largest_fraction(axial + radial, stress_1, mask),
                     "gorham": _largest_fraction(delta, stress, mask)}
        results.update({"inertia_dh_max_fraction": fractions["dh"], "inertia_gorham_max_fraction": fractions["gorham"],
                        "inertia_smoothing_us": window * 1e6})
        params.update({"inertia": "Davies & Hunter 1963 (one-wave stress); Gorham 1989 fuller form (reported stress)",
                       "density_kg_per_m3": specimen.density, "poisson_ratio": nu, "smoothing_us": window * 1e6})
        if max(fractions.values()) > INERTIA_LIMIT:
            flags.append(Flag("inertia_large", "warning",
                              f"the specimen's inertia may change the stress by up to {100 * max(fractions.values()):.1f} % "
                              f"(Davies & Hunter {100 * fractions['dh']:.1f} %, Gorham {100 * fractions['gorham']:.1f} %; "
                              f"limit {100 * INERTIA_LIMIT:.0f} %): see stress_inertia_*_MPa"))
    if analysis.friction_coefficient:
        mu = analysis.friction_coefficient
        factor = friction_factor(mu, specimen.length, specimen.diameter, curves.strain)
        friction = stress / factor
        high = float(np.max(factor[mask])) if mask.any() else float(factor[0])
        results.update({"friction_coefficient": mu, "friction_factor_max": high})
        params.update({"friction": "Siebel 1923 / Dieter 1986: mean stress = flow stress (1 + mu D / (3 L)), "
                                   "current D and L", "friction_coefficient": mu})
        if mask.any():
            band = [float(np.mean(friction[mask]) / 1e6), float(np.mean(stress[mask]) / 1e6)]
            results["flow_stress_friction_band_MPa"] = band
            flags.append(Flag("friction_band", "info",
                              f"with friction mu = {mu:g} the mean flow stress without friction lies between "
                              f"{band[0]:.4g} and {band[1]:.4g} MPa (factor up to {high:.3f}; not applied)"))
    return SpecimenCorrections(dh, gorham, friction, results, tuple(flags), params)


def _largest_fraction(correction, stress, mask) -> float:
    """Largest |correction| / |stress| over ``mask`` where the stress is at least 10 % of its peak there [1]
    (NaN when the mask is empty): at the foot of the curve a small stress would make any correction large."""
    if not mask.any():
        return float("nan")
    size = np.abs(stress[mask])
    keep = size >= 0.1 * np.max(size)
    if not keep.any():
        return float("nan")
    return float(np.max(np.abs(correction[mask][keep]) / size[keep]))
