"""Wheatstone-bridge conversion between recorded volts and gauge strain.

Conventions: the bridge ratio ``Vr = V_out / (gain * V_exc)`` is positive for
tension on the first active axial gauge (the textbook convention). Strains
returned by :func:`strain_from_ratio` are tension-positive, as a gauge sees
them; :func:`bar_strain` turns a recorded channel into the bar strain with the
package's sign convention (compression positive).

References
----------
.. [1] J. W. Dally and W. F. Riley, *Experimental Stress Analysis*, 3rd ed.,
   McGraw-Hill, 1991, ch. 7 (strain-gage circuits: the Wheatstone bridge).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

BRIDGES = ("quarter", "half-bending", "half-poisson", "full-poisson")


def strain_from_ratio(ratio: ArrayLike, bridge: str, gauge_factor: float, poisson_ratio: float = 0.3) -> np.ndarray:
    """Axial strain from the bridge ratio, with each bridge's exact non-linearity.

    Parameters
    ----------
    ratio : array_like
        Bridge ratio Vr = V_out / V_exc [1], positive for tension on gauge 1.
    bridge : str
        ``quarter``: one active gauge, three fixed arms.
        ``half-bending``: two axial gauges on opposite sides of the bar in
        opposite arms (bending cancels).
        ``half-poisson``: one axial and one transverse gauge in adjacent arms.
        ``full-poisson``: two axial gauges in opposite arms and two
        transverse gauges in the other two.
    gauge_factor : float
        Gauge factor GF [1].
    poisson_ratio : float
        Poisson ratio of the bar, for the transverse gauges [1].

    Returns
    -------
    ndarray
        Axial strain [1], tension positive.

    Notes
    -----
    With equal arms R and ΔR/R = GF·ε, the bridge output is exact algebra
    (ref. [1]); solving it for ε gives

    - quarter:      ε = 4 Vr / (GF (1 − 2 Vr))
    - half-bending: ε = 2 Vr / (GF (1 − Vr))
    - half-poisson: ε = 4 Vr / (GF ((1 + ν) − 2 Vr (1 − ν)))
    - full-poisson: ε = 2 Vr / (GF ((1 + ν) − Vr (1 − ν)))

    References
    ----------
    .. [1] Dally & Riley (1991), *Experimental Stress Analysis*, ch. 7.
    """
    vr = np.asarray(ratio, dtype=float)
    gf, nu = float(gauge_factor), float(poisson_ratio)
    if bridge == "quarter":
        return 4.0 * vr / (gf * (1.0 - 2.0 * vr))
    if bridge == "half-bending":
        return 2.0 * vr / (gf * (1.0 - vr))
    if bridge == "half-poisson":
        return 4.0 * vr / (gf * ((1.0 + nu) - 2.0 * vr * (1.0 - nu)))
    if bridge == "full-poisson":
        return 2.0 * vr / (gf * ((1.0 + nu) - vr * (1.0 - nu)))
    raise ValueError(f"unknown bridge {bridge!r}; expected one of {', '.join(BRIDGES)}")


def ratio_from_strain(strain: ArrayLike, bridge: str, gauge_factor: float, poisson_ratio: float = 0.3) -> np.ndarray:
    """Bridge ratio Vr [1] for an axial strain [1] (tension positive); the exact inverse of :func:`strain_from_ratio`."""
    e = np.asarray(strain, dtype=float) * float(gauge_factor)
    nu = float(poisson_ratio)
    if bridge == "quarter":
        return e / (4.0 + 2.0 * e)
    if bridge == "half-bending":
        return e / (2.0 + e)
    if bridge == "half-poisson":
        return e * (1.0 + nu) / (4.0 + 2.0 * e * (1.0 - nu))
    if bridge == "full-poisson":
        return e * (1.0 + nu) / (2.0 + e * (1.0 - nu))
    raise ValueError(f"unknown bridge {bridge!r}; expected one of {', '.join(BRIDGES)}")


def bar_strain(volts: ArrayLike, *, bridge: str, gauge_factor: float, excitation: float, gain: float = 1.0,
               polarity: int = 1, scale: float = 1.0, poisson_ratio: float = 0.3) -> np.ndarray:
    """Bar strain, compression positive, from a recorded channel [V].

    Parameters
    ----------
    volts : array_like
        Recorded voltage after the amplifier, baseline already removed [V].
    bridge, gauge_factor, poisson_ratio
        See :func:`strain_from_ratio`.
    excitation : float
        Bridge excitation [V].
    gain : float
        Amplifier gain [V/V].
    polarity : {1, -1}
        +1 if a compressive strain shows as a positive voltage.
    scale : float
        Calibration multiplier on the strain [1].

    Returns
    -------
    ndarray
        Bar strain [1], compression positive.
    """
    # A compressive strain gives Vr < 0 in the textbook convention; the record
    # shows it with sign `polarity`.
    ratio = -polarity * np.asarray(volts, dtype=float) / (gain * excitation)
    return -scale * strain_from_ratio(ratio, bridge, gauge_factor, poisson_ratio)


def bar_volts(strain: ArrayLike, *, bridge: str, gauge_factor: float, excitation: float, gain: float = 1.0,
              polarity: int = 1, scale: float = 1.0, poisson_ratio: float = 0.3) -> np.ndarray:
    """Recorded voltage [V] for a bar strain [1] (compression positive); inverse of :func:`bar_strain`."""
    ratio = ratio_from_strain(-np.asarray(strain, dtype=float) / scale, bridge, gauge_factor, poisson_ratio)
    return -polarity * ratio * gain * excitation


def shunt_strain(gauge_resistance: float, shunt_resistance: float, gauge_factor: float) -> float:
    """Equivalent strain of a shunt resistor across an active gauge arm.

    Parameters
    ----------
    gauge_resistance : float
        Gauge (arm) resistance Rg [ohm].
    shunt_resistance : float
        Shunt resistance Rs [ohm].
    gauge_factor : float
        Gauge factor GF [1].

    Returns
    -------
    float
        The strain [1] (tension positive) the shunt simulates: −Rg / (GF (Rg + Rs)).

    References
    ----------
    .. [1] Dally & Riley (1991), *Experimental Stress Analysis*, ch. 7 (shunt calibration).
    """
    rg, rs = float(gauge_resistance), float(shunt_resistance)
    return -rg / (gauge_factor * (rg + rs))
