"""Virtual fitting campaigns with a known Johnson–Cook truth, for the coverage of fit uncertainties.

A campaign is written at the level of reduced curves (no bar records): the
rate series of the shipped example campaign (fictional Harrow Ridge alloy
HR-A61, synthetic: three rates, two shots each, and a quasi-static reference
curve), drawn from the Johnson–Cook law (Johnson & Cook 1983) written out
here, independently of shpb.models, with the errors a reduced bar-test curve
carries:

- per shot, systematic: a stress scale error (gauge factor, bar modulus and
  areas; 1 % standard, a typical gauge-factor tolerance: common practice), a
  strain scale error (specimen length, 1 %), the true rate scattering 5 %
  about the nominal one and the reported mean rate off the true one by 1 %;
- along a curve, correlated: a decaying ringing of the stress (dispersion
  after the yield knee; 1 % of the stress at the knee, wavelength 0.02-0.04
  in strain, random phase) and a slow random drift (0.3 %, correlation length
  about 0.05);
- per sample: white noise of 1 MPa at one sample per 1e-4 of strain.

The quasi-static curve has half the stress-scale error, no ringing, and its
rate known exactly. Values are chosen for the example, not measured (from the
reduction's own error tables in docs/simulation.md, order of magnitude).
"""

from __future__ import annotations

import math

import numpy as np

from shpb.fit import Curve, CurveList

#: HR-A61 truth (scripts/make_example_data.py; a fictional alloy), reference rate 1e-3 1/s.
TRUTH = dict(A=300e6, B=400e6, n=0.40, C=0.010)
REFERENCE_RATE = 1e-3
TR = 293.15
#: (nominal rate [1/s], plastic-strain range) of the shots; each rate shot twice.
SHOTS = ((1000.0, (0.012, 0.13)), (2500.0, (0.015, 0.20)), (5000.0, (0.03, 0.30)))


def jc_stress(ep, rate, A, B, n, C):
    """Johnson & Cook (1983) flow stress at room temperature [Pa], written out."""
    return (A + B * ep**n) * (1.0 + C * np.log(rate / REFERENCE_RATE))


def _drift(ep, rng, amplitude, length):
    """A smooth random function of strain: sum of random cosines with wavelengths above ``length``."""
    k = rng.uniform(0.3, 1.0, 6) * 2 * np.pi / length
    ph = rng.uniform(0, 2 * np.pi, 6)
    a = rng.standard_normal(6) / math.sqrt(3.0)
    return amplitude * np.sum(a[:, None] * np.cos(k[:, None] * ep[None, :] + ph[:, None]), axis=0)


def campaign(seed, *, scale=0.01, strain_scale=0.01, ringing=0.01, drift=0.003, noise=1e6, spacing=1e-4):
    """One virtual campaign: a CurveList of 6 shots and 1 quasi-static curve (raw samples).

    Returns
    -------
    CurveList
        Curves with plastic strain [1], true stress [Pa] and reported rate [1/s].
    """
    rng = np.random.default_rng(seed)
    curves = []
    for rate, (lo, hi) in SHOTS:
        for rep in "ab":
            true_rate = rate * (1.0 + 0.05 * rng.standard_normal())
            ep = np.arange(lo, hi, spacing)
            sig = jc_stress(ep, true_rate, **TRUTH)
            sig = sig * (1.0 + scale * rng.standard_normal())
            lam = rng.uniform(0.02, 0.04)
            ring = ringing * np.exp(-(ep - lo) / 0.05) * np.sin(2 * np.pi * (ep - lo) / lam + rng.uniform(0, 2 * np.pi))
            sig = sig * (1.0 + ring + _drift(ep, rng, drift, 0.05)) + noise * rng.standard_normal(ep.size)
            ep_meas = ep * (1.0 + strain_scale * rng.standard_normal())
            curves.append(Curve(f"V-{rate:.0f}-{rep}", ep_meas, sig, true_rate * (1 + 0.01 * rng.standard_normal()),
                                TR, material="HR-A61 (fictional)"))
    ep = np.arange(0.005, 0.2, spacing)
    sig = jc_stress(ep, REFERENCE_RATE, **TRUTH) * (1.0 + 0.5 * scale * rng.standard_normal())
    sig = sig * (1.0 + _drift(ep, rng, drift, 0.05)) + 0.5 * noise * rng.standard_normal(ep.size)
    curves.append(Curve("V-qs", ep, sig, REFERENCE_RATE, TR, material="HR-A61 (fictional)", kind="quasi-static"))
    return CurveList(curves)
