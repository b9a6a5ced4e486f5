"""The Kolsky (split-Hopkinson pressure bar) equations.

Inputs are the incident, reflected and transmitted bar strains already
shifted to the specimen faces; compression is positive, so the reflected
strain of a compression test is negative. Face 1 (front) touches the
incident bar, face 2 (back) the transmitted bar. The incident and
transmitted bars may differ (own modulus, area and wave speed).

References
----------
.. [1] H. Kolsky, "An investigation of the mechanical properties of materials
   at very high rates of loading," Proc. Phys. Soc. B 62, 676–700 (1949),
   doi:10.1088/0370-1301/62/11/302.
.. [2] G. T. Gray III, "Classic split-Hopkinson pressure bar testing," in
   ASM Handbook Vol. 8, Mechanical Testing and Evaluation, ASM International,
   2000, pp. 462–476.
.. [3] W. Chen and B. Song, *Split Hopkinson (Kolsky) Bar: Design, Testing
   and Applications*, Springer, 2011, ch. 1, doi:10.1007/978-1-4419-7982-7.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike

if TYPE_CHECKING:  # pragma: no cover
    from .pulses import FaceWaves
    from .setup import BarSet, Specimen


def face_forces(strain_incident: ArrayLike, strain_reflected: ArrayLike, strain_transmitted: ArrayLike,
                incident_modulus: float, incident_area: float, transmitted_modulus: float,
                transmitted_area: float) -> tuple[np.ndarray, np.ndarray]:
    """Forces on the specimen's front and back faces.

    F1 = E_i A_i (ε_i + ε_r),  F2 = E_t A_t ε_t  (refs [1]–[3]).

    Parameters
    ----------
    strain_incident, strain_reflected, strain_transmitted : array_like
        Bar strains at the faces [1], compression positive.
    incident_modulus, transmitted_modulus : float
        Bar Young's moduli [Pa].
    incident_area, transmitted_area : float
        Bar cross-sections [m^2].

    Returns
    -------
    force_front, force_back : ndarray
        Compressive forces on faces 1 and 2 [N].
    """
    ei, er, et = (np.asarray(x, dtype=float) for x in (strain_incident, strain_reflected, strain_transmitted))
    return incident_modulus * incident_area * (ei + er), transmitted_modulus * transmitted_area * et


def face_velocities(strain_incident: ArrayLike, strain_reflected: ArrayLike, strain_transmitted: ArrayLike,
                    incident_wave_speed: float, transmitted_wave_speed: float) -> tuple[np.ndarray, np.ndarray]:
    """Particle velocities of the specimen faces, positive towards the transmitted bar.

    v1 = c_i (ε_i − ε_r),  v2 = c_t ε_t  (refs [1]–[3]).

    Returns
    -------
    velocity_front, velocity_back : ndarray
        [m/s].
    """
    ei, er, et = (np.asarray(x, dtype=float) for x in (strain_incident, strain_reflected, strain_transmitted))
    return incident_wave_speed * (ei - er), transmitted_wave_speed * et


def strain_rate(velocity_front: ArrayLike, velocity_back: ArrayLike, specimen_length: float) -> np.ndarray:
    """Three-wave engineering strain rate (v1 − v2) / L_s [1/s], compression positive."""
    return (np.asarray(velocity_front, dtype=float) - np.asarray(velocity_back, dtype=float)) / specimen_length


def strain_rate_reflected(strain_reflected: ArrayLike, bar_wave_speed: float, specimen_length: float) -> np.ndarray:
    """Classic strain rate from the reflected wave alone, −2 c0 ε_r / L_s [1/s].

    Assumes force equilibrium (ε_i + ε_r = ε_t) and identical bars (refs [2], [3]).
    """
    return -2.0 * bar_wave_speed * np.asarray(strain_reflected, dtype=float) / specimen_length


def integrate(rate: ArrayLike, dt: float) -> np.ndarray:
    """Cumulative trapezoidal integral of a rate sampled at ``dt`` [s], starting at 0."""
    r = np.asarray(rate, dtype=float)
    out = np.zeros_like(r)
    if r.size > 1:
        out[1:] = np.cumsum(0.5 * (r[1:] + r[:-1])) * dt
    return out


def stresses(force_front: ArrayLike, force_back: ArrayLike, specimen_area: float) -> dict:
    """One-, two- and three-wave engineering stress [Pa].

    one-wave = F2 / A_s (back face), two-wave = F1 / A_s (front face),
    three-wave = (F1 + F2) / (2 A_s) (refs [2], [3]).

    Returns
    -------
    dict
        ``{"1-wave": ndarray, "2-wave": ndarray, "3-wave": ndarray}``.
    """
    f1 = np.asarray(force_front, dtype=float)
    f2 = np.asarray(force_back, dtype=float)
    return {"1-wave": f2 / specimen_area, "2-wave": f1 / specimen_area, "3-wave": 0.5 * (f1 + f2) / specimen_area}


def true_stress_strain(strain: ArrayLike, stress: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """True strain and stress from engineering values, compression positive, volume constant.

    ε_T = −ln(1 − e),  σ_T = σ (1 − e)  (ref. [3], ch. 1).

    Parameters
    ----------
    strain : array_like
        Engineering strain e [1] (compression positive; must stay below 1).
    stress : array_like
        Engineering stress [Pa].

    Returns
    -------
    true_strain, true_stress : ndarray
    """
    e = np.asarray(strain, dtype=float)
    s = np.asarray(stress, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return -np.log1p(-e), s * (1.0 - e)


def equilibrium_ratio(force_front: ArrayLike, force_back: ArrayLike, floor: float = 0.0) -> np.ndarray:
    """Force-equilibrium factor R(t) = 2 (F1 − F2) / (F1 + F2).

    Parameters
    ----------
    force_front, force_back : array_like
        Face forces [N].
    floor : float
        Where |F1 + F2| / 2 is below ``floor`` [N], R is NaN (the ratio of two
        noise values means nothing).

    Returns
    -------
    ndarray
        R [1]; |R| <= 0.05 is the usual equilibrium criterion (Ravichandran &
        Subhash 1994, J. Am. Ceram. Soc. 77:263, doi:10.1111/j.1151-2916.1994.tb06987.x).
    """
    f1 = np.asarray(force_front, dtype=float)
    f2 = np.asarray(force_back, dtype=float)
    mean = 0.5 * (f1 + f2)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = (f1 - f2) / mean
    r[np.abs(mean) <= floor] = np.nan
    return r


# --------------------------------------------------------------------------- stage 4: the Kolsky curves
@dataclass(frozen=True)
class KolskyCurves:
    """Stage 4 of a reduction: the specimen's response from the three face waves (SI arrays).

    Attributes
    ----------
    time : ndarray
        Time at the faces [s].
    force_front, force_back : ndarray
        Face forces F1, F2 [N].
    velocity_front, velocity_back : ndarray
        Face velocities v1, v2 [m/s].
    strain_rate, strain_rate_reflected : ndarray
        Three-wave and reflected-wave engineering strain rates [1/s].
    strain, strain_from_reflected : ndarray
        Their time integrals [1].
    stress_by_form : dict
        ``"1-wave"``, ``"2-wave"``, ``"3-wave"`` -> engineering stress [Pa].
    stress_form : str
        The form reported as ``stress``.
    true_strain : ndarray
        [1].
    true_stress : ndarray
        Of the reported form [Pa].
    """

    time: np.ndarray
    force_front: np.ndarray
    force_back: np.ndarray
    velocity_front: np.ndarray
    velocity_back: np.ndarray
    strain_rate: np.ndarray
    strain_rate_reflected: np.ndarray
    strain: np.ndarray
    strain_from_reflected: np.ndarray
    stress_by_form: dict
    stress_form: str
    true_strain: np.ndarray
    true_stress: np.ndarray

    @property
    def stress(self) -> np.ndarray:
        """The reported engineering stress [Pa]."""
        return self.stress_by_form[self.stress_form]

    @property
    def provenance(self) -> dict:
        return {"step": "kolsky", "parameters": {"reported_stress": self.stress_form, "strain_rate": "three-wave"}}


def kolsky_curves(waves: "FaceWaves", barset: "BarSet", specimen: "Specimen",
                  stress_form: str = "1-wave") -> KolskyCurves:
    """Stage 4: face forces and velocities, strain rates, strains and stresses of a shot.

    Parameters
    ----------
    waves : shpb.pulses.FaceWaves
        Incident, reflected and transmitted bar strains at the faces.
    barset : shpb.setup.BarSet
        Bar moduli, areas and wave speeds.
    specimen : shpb.setup.Specimen
        Initial length and area.
    stress_form : str
        ``1-wave``, ``2-wave`` or ``3-wave``: the stress reported.

    Returns
    -------
    KolskyCurves

    Raises
    ------
    AnalysisError
        The engineering strain reaches 1 (a wrong specimen length or bar setup).
    """
    bi, bt = barset.incident, barset.transmitted
    ei, er, et = waves.incident, waves.reflected, waves.transmitted
    f1, f2 = face_forces(ei, er, et, bi.modulus, bi.area, bt.modulus, bt.area)
    v1, v2 = face_velocities(ei, er, et, bi.wave_speed, bt.wave_speed)
    rate = strain_rate(v1, v2, specimen.length)
    rate_r = strain_rate_reflected(er, bi.wave_speed, specimen.length)
    strain = integrate(rate, waves.dt)
    if np.any(strain >= 1.0):
        from .errors import AnalysisError

        raise AnalysisError(f"the engineering strain reaches {np.max(strain):.2f} (>= 1): check the specimen "
                            f"length and the bar setup")
    sig = stresses(f1, f2, specimen.area)
    true_strain, true_stress = true_stress_strain(strain, sig[stress_form])
    return KolskyCurves(time=waves.time, force_front=f1, force_back=f2, velocity_front=v1, velocity_back=v2,
                        strain_rate=rate, strain_rate_reflected=rate_r, strain=strain,
                        strain_from_reflected=integrate(rate_r, waves.dt), stress_by_form=sig,
                        stress_form=stress_form, true_strain=true_strain, true_stress=true_stress)
