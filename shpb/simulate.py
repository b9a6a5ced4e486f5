"""Virtual shot: one-dimensional wave propagation through a whole pressure-bar rig.

The rig is a chain of 1-D rods in compression-only contact::

    striker -> [pulse shaper] -> incident bar -> [specimen] -> transmitted bar

The pulse shaper sits on the impact face of the incident bar, where shapers
are placed in practice (Frew, Forrestal & Chen 2002); without a specimen the
bars touch (a bars-together shot); without a transmitted bar the incident
bar's far end is free (a free-end shot). A prescribed pulse may drive the
incident bar's impact face instead of the striker (:class:`IncidentPulse`).

Each rod has its own modulus, density and cross-section, so impedance changes
at the interfaces follow from force continuity. The specimen and the pulse
shaper may carry a plastic constitutive law. The model returns the bar strains
at two gauge stations (what a recorder would see, before the bridge) and the
specimen's "ground truth" (mean stress, strain, strain rate, face forces) on
the same time base, so a reduction can be checked against known answers.

Numerical scheme
----------------
Explicit staggered grid (leapfrog): velocities at nodes and half steps, strains
and forces in elements at whole steps; lumped nodal masses.

* **Bars at Courant number exactly 1.** Every bar and the striker gets its
  own element length ``dx = c0 dt``. At Courant 1 the staggered scheme is
  exact for the 1-D wave equation (its dispersion relation
  ``sin(omega dt / 2) = C sin(k dx / 2)`` reduces to ``omega = c0 k``): a step
  front crosses one element per step with no ringing, and an element's strain
  is the exact average over the element. Bar lengths are therefore whole
  numbers of elements: each is rounded to the nearest ``c0 dt`` (error at
  most ``c0 dt / 2``, about 0.13 mm on a typical rig); the modelled lengths
  are reported in :attr:`VirtualShotResult.grid`.
* **Time step, and why the bars are refined rather than sub-cycled.** One
  common ``dt`` for the whole chain, set by the finest resolved rod: the
  specimen (at least 20 elements) or the shaper runs at Courant exactly 1
  (exact for its elastic waves), the other with as many elements as keep
  its Courant number <= 1 (as close to 1 as the grid allows). A short
  specimen thus forces a small ``dt``. Rather than run the bars at
  Courant < 1 (dispersive: oscillations trail every front) or sub-cycle
  the specimen (an interface-coupling error of the order of the bar step,
  where the reduction is most sensitive), the bar elements are shortened
  to ``c0 dt`` so the bars stay exact. On the grid that would cost
  ~ ``1/dt**2`` (for a 5 mm metal specimen on 1.5 m bars about 13 000
  nodes and 20 000 steps per millisecond); the delay lines below make the
  bars free, so the cost is that of the specimen, ~ ``1/dt``. Without a
  specimen or shaper, ``dt`` is the largest divisor of the sample interval
  not above ``max_time_step``.
* **Elastic bars as delay lines.** At Courant 1 the scheme in an elastic
  rod *is* the d'Alembert solution on the grid: each element's strain is
  the sum of a wave travelling +x and one travelling -x, and each step both
  move one element on unchanged (Graff 1975, ch. 2). So the striker and the
  bars, when elastic, are not marched node by node: each is kept as the
  histories of the two waves entering it at its ends
  (:class:`_DelayLine`), and only its two end nodes are integrated, with
  the same masses and forces as on the grid; the wave an end sends in
  follows from its velocity by the characteristic relation
  ``R_0(n+1) = L_0(n) - v_0(n+1/2) / c0`` (and its mirror at the other
  end). An elastic specimen or shaper that runs at Courant 1 (the rod that
  sets the step) is a delay line too. A plastic specimen or shaper, one
  below Courant 1, any rod with a plastic law and the contacts are marched
  as below. The results
  are those of the node-by-node march to round-off (checked against it in
  the tests), at a cost per step independent of the bars' length; the gauge
  strains, the two travelling waves at each gauge and the energies are read
  from the wave histories afterwards (the energies' cross term
  ``sum R_j L_j`` for every step at once by FFT, :func:`_band_pair_sums`).
* **What is marched, and how cheaply.** A small grid (the specimen, the
  shaper) takes its elastic step as one matrix product on its state
  (:meth:`_Grid.step_matrix`; plastic strains enter as offsets), and a
  plastic rod takes the return mapping only in a step where one of its
  forces reaches its smallest flow stress; a grid at rest (before the wave
  reaches the specimen) is not stepped until a contact on one of its end
  nodes closes, since until then a step changes nothing. The same
  equations as the node-by-node march, in another order of the floating-
  point operations: elastic results agree to round-off; where a contact
  chatters after the test (a specimen rattling between the bars once
  unloaded), round-off decides when it opens and closes, as it did between
  the node-by-node march and the delay lines.
* **Recorder clock.** The model keeps the two steps around each sample time
  and interpolates linearly. At Courant 1 a bar element's strain is the
  element average, which varies linearly in time while a front crosses it,
  so the interpolation adds nothing there beyond the element averaging
  (an element, ~0.25 mm, is shorter than a strain gauge).
* **Contact.** Neighbouring rods touch through compression-only contacts
  enforced by a momentum-conserving impulse (forward-increment Lagrange
  multiplier, Carpenter et al. 1991): if the two end nodes would overlap at
  the end of a step, an impulse brings them to a common position. While
  closed, the pair moves as one node; a contact never carries tension, so
  rods separate freely. Two Courant-1 rods in contact (striker and bar, or
  bars together) then form an exact uniform chain; reflection and
  transmission at an impedance change come out exact. The first impact is
  a perfectly inelastic collision of the two end nodes, which loses
  ``mu v**2 / 2`` (``mu`` = reduced mass of the two end nodes), about
  ``dx / (4 L_striker)`` of the striker's energy; re-closing contacts
  (rebounds after the pulse) lose similar amounts. Otherwise the scheme
  conserves energy to round-off in an elastic run.
* **Bar ends at a resolved rod.** A half-mass end node of a Courant-1 bar,
  driven by a force (a soft specimen is nearly a force source), rings at the
  grid's odd-even (Nyquist) mode, which Courant 1 propagates undamped. A bar
  end touching the specimen or the shaper therefore carries a whole element
  mass, so its face lies half an element beyond the node; this makes a
  force-driven end exact. The specimen is attached to the node, so it
  starts to load up to half a step (``dt / 2``, ~0.025 us) before the
  nominal arrival at the face, and a sharp front reflected there shows a
  one-sample overshoot of a few per cent of the step.
* **Plasticity.** Specimen and shaper elements use a 1-D return mapping
  (Simo & Hughes 1998, ch. 1) on a flow stress
  ``flow_stress(plastic_strain, plastic_strain_rate)``, with isotropic
  hardening; the rate term is implicit (backward Euler in the plastic
  increment), since an explicit rate term acts as an explicit viscosity
  and goes unstable at the Courant-1 step. The scalar equation for the
  increment is solved by a safeguarded Newton iteration (on the logarithm
  of the increment where a rate term dominates); the law is asked once per
  iteration, and a flowing element starts from its increment extrapolated
  from the last three steps, so a step of plastic flow usually costs one
  call of the law (:func:`_solve_increment`, :class:`_PlasticState`).
* **Small strain, engineering quantities.** The bars are small-strain and
  elastic. The specimen and shaper are modelled in engineering quantities:
  constant cross-section, element stress = force / initial area, strain =
  change of length / initial length. A law is thus applied to engineering
  stress and strain; beyond a few per cent strain this differs from a
  true-stress law, and a shaper crushed to large strain (whose area grows)
  is outside the model: a specimen or shaper whose mean strain reaches 1
  raises :class:`~shpb.errors.AnalysisError`. A perfectly plastic specimen
  (no hardening) concentrates its plastic strain in its end elements, since
  1-D rate-independent perfect plasticity has no unique strain distribution;
  the averages are unaffected (``peak_element_strain`` in the grid report
  shows it). The truth columns are engineering values, consistent with the
  model and with what a Kolsky reduction reports.

Signs: inside the model tension is positive and x runs from the striker to
the transmitted bar; every output is compression positive.

From the model to a record
--------------------------
The later sections turn a model run into what a scope records
(:func:`virtual_record`: bridge volts, noise, offset, quantisation, clipping)
and add the Pochhammer–Chree dispersion the model's 1-D bars lack. The bar
strain at each gauge is split exactly into its two travelling waves
(``VirtualShotResult.gauge_waves``), and each wave is given the dispersion of
its own path (:func:`dispersed_gauge_strains`). For a specimen shot the
striker's pulse is first dispersed over the incident bar and sent in as a
prescribed pulse (:func:`dispersed_drive`), so that the specimen responds to
the dispersed incident wave a real bar would deliver and the model's truth
belongs to it; the recorded waves then carry their dispersion from the
specimen faces (incident wave: over the impact-face-to-gauge distance).
Reading a simulation setup file, writing the outputs and drawing the figure
are left to the file and figure edge, :mod:`shpb.virtual`
(:func:`~shpb.virtual.load_simulation`, :func:`~shpb.virtual.simulate_setup`,
:func:`~shpb.virtual.write_virtual_shot`); see ``docs/simulation.md``.

References
----------
.. [1] H. Kolsky, "An investigation of the mechanical properties of materials
   at very high rates of loading", Proc. Phys. Soc. B 62 (1949) 676-700,
   doi:10.1088/0370-1301/62/11/302.
.. [2] K. F. Graff, Wave Motion in Elastic Solids, Oxford Univ. Press, 1975,
   ch. 2 (longitudinal waves in rods, reflection and transmission).
.. [3] N. J. Carpenter, R. L. Taylor, M. G. Katona, "Lagrange constraints for
   transient finite element surface contact", Int. J. Numer. Methods Eng. 32
   (1991) 103-128, doi:10.1002/nme.1620320107.
.. [4] J. C. Simo, T. J. R. Hughes, Computational Inelasticity, Springer,
   1998, ch. 1 (one-dimensional plasticity and viscoplasticity, return mapping),
   doi:10.1007/b98904.
.. [5] G. R. Johnson, W. H. Cook, "A constitutive model and data for metals
   subjected to large strains, high strain rates and high temperatures",
   Proc. 7th Int. Symp. Ballistics, The Hague, 1983, 541-547.
.. [6] D. J. Frew, M. J. Forrestal, W. Chen, "Pulse shaping techniques for
   testing brittle materials with a split Hopkinson pressure bar", Exp.
   Mech. 42 (2002) 93-106.
.. [7] P. S. Follansbee, C. Frantz, "Wave propagation in the split Hopkinson
   pressure bar", J. Eng. Mater. Technol. 105 (1983) 61-66,
   doi:10.1115/1.3225620.
"""

from __future__ import annotations

import dataclasses
import functools
import math
import numbers
from dataclasses import dataclass, field
from typing import Callable, Optional

import numpy as np

from .errors import AnalysisError, InputError
from .io import station_name
from .models import johnson_cook

__all__ = [
    "PerfectlyPlastic",
    "JohnsonCookLaw",
    "FlowStressLaw",
    "TrueStressLaw",
    "radial_return",
    "RodSpec",
    "bar_rod",
    "VirtualShotSpec",
    "VirtualShotResult",
    "simulate_shot",
    "RecorderSpec",
    "VirtualRecord",
    "TRIGGERS",
    "trigger_time",
    "model_duration",
    "incident_bar_stress",
    "plan_shot",
    "check_plan",
    "digitise",
    "excess_dispersion",
    "dispersed_gauge_strains",
    "virtual_record",
    "dispersed_station_strains",
    "IncidentPulse",
    "incident_pulse",
    "dispersed_drive",
]


# --------------------------------------------------------------------------- constitutive laws
@dataclass(frozen=True)
class PerfectlyPlastic:
    """Elastic-perfectly-plastic law: constant flow stress ``yield_stress`` [Pa]."""

    yield_stress: float

    def flow_stress(self, plastic_strain, strain_rate):
        """Flow stress [Pa] (the yield stress, whatever the strain and rate)."""
        return np.full(np.shape(plastic_strain), float(self.yield_stress))


@dataclass(frozen=True)
class JohnsonCookLaw:
    """Elastic with Johnson-Cook hardening at constant temperature (room temperature, T* = 0).

    The law itself is :func:`shpb.models.johnson_cook`, the function the
    fitter uses; this object holds its parameters for the simulator.

    Attributes
    ----------
    A, B : float
        Yield stress and hardening modulus [Pa].
    n : float
        Hardening exponent [1].
    C : float
        Rate sensitivity [1].
    reference_rate : float
        Reference strain rate [1/s] (1 s^-1 in Johnson & Cook 1983).

    Notes
    -----
    The flow stress is evaluated with ``rate_floor = reference_rate``: no rate
    effect below the reference rate, so the quasi-static strength at zero
    plastic rate (the return mapping's yield check) is finite. Why, and how
    this differs from the published form, is set out once in the Notes of
    :func:`shpb.models.johnson_cook`.
    """

    A: float
    B: float
    n: float
    C: float
    reference_rate: float = 1.0

    def flow_stress(self, plastic_strain, strain_rate):
        """Flow stress [Pa] at equivalent plastic strain [1] and plastic strain rate [1/s]."""
        # temperature None: isothermal at room temperature, no thermal term (m unused)
        return johnson_cook(plastic_strain, strain_rate, None, self.A, self.B, self.n, self.C, m=1.0,
                            reference_rate=self.reference_rate, rate_floor=self.reference_rate)


@dataclass(frozen=True)
class FlowStressLaw:
    """Elastic-plastic with a user flow stress ``function(plastic_strain [1], strain_rate [1/s]) -> [Pa]``.

    The function receives numpy arrays (equivalent plastic strain and plastic
    strain rate) and must return flow stresses >= 0, finite at zero rate
    (the quasi-static limit used for the yield check).
    """

    function: Callable

    def flow_stress(self, plastic_strain, strain_rate):
        """Flow stress [Pa] from the user function."""
        out = np.asarray(self.function(plastic_strain, strain_rate), dtype=float)
        return np.broadcast_to(out, np.shape(plastic_strain))


@dataclass(frozen=True)
class TrueStressLaw:
    """A law written in true stress and true plastic strain, applied to the model's engineering quantities.

    Constitutive laws (Johnson-Cook among them) are fitted to true stress
    against true plastic strain. The model's specimen works in engineering
    stress and strain (force over the initial area, change of length over the
    initial length), which in uniaxial compression is exact as a momentum
    balance in the initial configuration. This wrapper turns the true law into
    the engineering flow stress the return mapping needs.

    Attributes
    ----------
    law : object
        The true-stress law, with ``flow_stress(true_plastic_strain [1],
        true_plastic_strain_rate [1/s]) -> Pa``.
    modulus : float
        Young's modulus E of the specimen [Pa].

    Notes
    -----
    Volume constancy in compression (common practice; the same assumption as
    the reduction's true stress): ``sigma_true = sigma_eng (1 - e)`` with
    ``e`` the total engineering strain. With the model's additive split
    ``e = e_p + sigma_eng / E`` this is a quadratic in ``sigma_eng`` whose
    root continuous with ``sigma_true`` at small strain is

        sigma_eng = 2 sigma_true / ((1 - e_p) + sqrt((1 - e_p)**2 - 4 sigma_true / E)).

    The true plastic strain passed to the law is ``-ln(1 - e_p)`` and the
    true plastic rate ``rate / (1 - e_p)``. The true plastic strain a
    reduction computes (``-ln(1 - e) - sigma_true / E``) differs from it by
    about ``2 e sigma / E`` (0.4 % of strain at e = 0.3 for a metal), which
    shifts the stress by well under 1 %.

    References
    ----------
    .. [1] W. Chen, B. Song, Split Hopkinson (Kolsky) Bar, Springer, 2011,
       ch. 1 (true stress and strain from engineering values, volume constant).
    """

    law: object
    modulus: float

    def flow_stress(self, plastic_strain, strain_rate):
        """Engineering flow stress [Pa] at engineering plastic strain [1] and rate [1/s]."""
        stretch = np.subtract(1.0, plastic_strain, dtype=float)  # 1 - p, p clipped to [0, 0.999]
        np.maximum(stretch, 0.001, out=stretch)
        np.minimum(stretch, 1.0, out=stretch)
        true_strain = np.log(stretch)
        np.negative(true_strain, out=true_strain)
        true = np.asarray(self.law.flow_stress(true_strain, np.divide(strain_rate, stretch)), dtype=float)
        root = np.multiply(stretch, stretch)
        root -= true * (4.0 / self.modulus)
        np.maximum(root, 0.0, out=root)
        np.sqrt(root, out=root)
        root += stretch
        root *= 0.5
        return np.divide(true, root, out=root)


def _as_law(law, where):
    """A law object (with ``flow_stress``), a bare callable wrapped, or None (elastic)."""
    if law is None or hasattr(law, "flow_stress"):
        return law
    if callable(law):
        return FlowStressLaw(law)
    raise InputError(f"expected None, a law with flow_stress(), or a callable, got {law!r}", where)


def radial_return(trial_stress, plastic_strain, modulus, flow_stress, dt, *, guess=None, rtol=1e-10, max_iter=60):
    """One-dimensional return mapping with isotropic and rate hardening.

    For each element whose trial stress exceeds the quasi-static flow stress
    ``flow_stress(eps_p, 0)``, solves (backward Euler)

    ``|sigma_trial| - E dg - flow_stress(eps_p + dg, dg / dt) = 0``

    for the plastic strain increment ``dg >= 0`` by a safeguarded Newton
    iteration inside the bracket ``[0, |sigma_trial| / E]`` (details in
    :func:`_solve_increment`), until the residual is within ``rtol`` of the
    trial stress or a Newton step changes ``dg`` by at most ``1e-5`` of
    itself. The rate passed to the flow stress is the plastic strain rate
    ``dg / dt``, so rate hardening is treated implicitly (an explicit rate
    term acts like an explicit viscosity and goes unstable at the Courant-1
    time step).

    Parameters
    ----------
    trial_stress : ndarray
        Elastic trial stress E (eps - eps_plastic_old) [Pa], tension positive.
    plastic_strain : ndarray
        Accumulated equivalent plastic strain before the step [1].
    modulus : float
        Young's modulus E [Pa].
    flow_stress : callable
        ``flow_stress(plastic_strain [1], plastic_strain_rate [1/s]) -> Pa``,
        vectorised, finite at zero rate and >= 0.
    dt : float
        Time step [s].
    guess : ndarray, optional
        Starting increments (e.g. those of the previous step) [1].
    rtol : float
        Tolerance on the yield condition, relative to the trial stress [1].
    max_iter : int
        Iteration limit.

    Returns
    -------
    stress : ndarray
        Returned stress [Pa], tension positive.
    increment : ndarray
        Plastic strain increment dg >= 0 [1]; the signed plastic strain
        changes by ``sign(trial_stress) * dg``.

    References
    ----------
    .. [1] J. C. Simo, T. J. R. Hughes, Computational Inelasticity, Springer,
       1998, ch. 1 (one-dimensional plasticity and viscoplasticity),
       doi:10.1007/b98904.
    """
    trial = np.asarray(trial_stress, dtype=float)
    size = np.abs(trial)
    p = np.asarray(plastic_strain, dtype=float)
    increment = np.zeros_like(trial)
    quasi_static = np.asarray(flow_stress(p, np.zeros_like(p)), dtype=float)
    yielding = np.flatnonzero(size > quasi_static)
    if yielding.size:
        x0 = None if guess is None else np.asarray(guess, dtype=float)[yielding]
        increment[yielding], _ = _solve_increment(size[yielding], p[yielding], modulus, flow_stress, dt, x0,
                                                  rtol, max_iter, quasi_static[yielding])
    return trial - np.sign(trial) * modulus * increment, increment


def _solve_increment(size, p, E, flow_stress, dt, x0, rtol, max_iter, quasi_static):
    """The plastic increments of :func:`radial_return` and the quasi-static flow stress after them.

    ``quasi_static`` is ``flow_stress(p, 0)`` (the yield check's). Each
    iteration asks the law once (:func:`_flow_points`): at the iterate ``x``
    and at ``x + h`` (``h = 1e-6 x``), at the plastic rate (residual and
    forward-difference slope) and at zero rate (the quasi-static flow stress
    after the step, returned so that a caller can keep it for the next yield
    check). The first iteration tries both starting points, the guess and
    the rate-independent estimate ``(|s_trial| - quasi_static) / E`` (exact
    for perfect plasticity), and goes on from the better one.

    The residual ``g(x) = |s_trial| - E x - s_y(p + x, x / dt)`` falls
    monotonically from ``g(0+) > 0`` (the yield check) to
    ``g(|s_trial| / E) <= 0`` (``s_y >= 0``), so the root stays bracketed.
    Newton steps are taken on ``x``, or on ``ln x`` where the law's slope
    exceeds E (a rate term in ``ln x`` then dominates and ``g`` is nearly
    linear in ``ln x``; roots at the onset of flow lie orders of magnitude
    below the rate-independent first guess). A step from one side of the
    root that overshoots the bracket is replaced by the step from the
    bracket's other end (the side from which Newton converges monotonically
    for a residual convex in the variable), and failing that by bisection:
    geometric across a bracket wider than a factor of 4, and down by
    decades while no point below the root is known.

    An element has converged, and stops iterating, when
    ``|g| <= rtol |s_trial|``, or when a Newton step inside the bracket
    changes ``x`` by at most ``1e-5 x``: the residual after it is then about
    ``g'' dx**2 / 2``, below ``5e-11 x**2 |g''|`` (for a Johnson-Cook rate
    term ``x**2 g''`` is about ``C sigma``, a few MPa: some 1e-4 Pa), so the
    step is taken without asking the law again, and the quasi-static flow
    stress is carried to it along its forward-difference slope. The second
    test also ends the iteration where the law's own round-off keeps
    ``|g|`` above the tolerance.
    """
    n = size.size
    x_out, quasi_static_out = np.empty(n), np.empty(n)
    active = np.arange(n)  # elements still iterating
    lo, hi = np.zeros_like(size), size / E
    tol = rtol * size
    ends = np.full((6, n), np.nan)  # residual, slope and law slope at lo, then at hi (NaN: not evaluated there)
    x = (size - quasi_static) / E  # exact for a rate-independent perfectly plastic law
    candidates = [x]
    if x0 is not None:  # warm start from the previous step where it lies inside the bracket
        usable = (x0 > 0.0) & (x0 < hi)
        if usable.any():
            candidates.append(np.where(usable, x0, x))
    for _ in range(max_iter):
        k, m = len(candidates), active.size
        xs = np.concatenate(candidates) if k > 1 else candidates[0]
        h, flow, ahead, base, beyond = _flow_points(flow_stress, np.concatenate((p, p)) if k > 1 else p, xs, dt)
        g = (np.concatenate((size, size)) if k > 1 else size) - E * xs - flow
        law_slope = (ahead - flow) / h
        if k > 1:  # go on from the candidate with the smaller residual; both narrow the bracket (below)
            pick = np.argmin(np.abs(g).reshape(k, m), axis=0) * m + np.arange(m)
            points = xs, g, law_slope
            x, g, h, law_slope, base, beyond = xs[pick], g[pick], h[pick], law_slope[pick], base[pick], beyond[pick]
        else:
            x = points = xs
        slope = E + law_slope
        small = np.abs(g) <= tol
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            step = _newton_step(x, g, slope, law_slope, E)
        inside = (step > lo) & (step < hi) & np.isfinite(step)
        done = small | (inside & (np.abs(step - x) <= 1e-5 * x))
        if done.any():  # small steps are taken; the quasi-static flow stress follows along its slope
            x_new = np.where(small, x, step)[done]
            x_out[active[done]] = x_new
            quasi_static_out[active[done]] = base[done] + (beyond[done] - base[done]) / h[done] * (x_new - x[done])
            if done.all():
                return x_out, quasi_static_out
        if k > 1:
            for j in range(k):  # every evaluated point narrows the bracket
                cut = slice(j * m, (j + 1) * m)
                _narrow(lo, hi, ends, points[0][cut], points[1][cut], points[2][cut], E)
        else:
            _narrow(lo, hi, ends, x, g, law_slope, E)
        if done.any():
            keep = ~done
            active, size, p, lo, hi, tol, ends = active[keep], size[keep], p[keep], lo[keep], hi[keep], tol[keep], \
                ends[:, keep]
            x, step = x[keep], step[keep]
        inside = (step > lo) & (step < hi) & np.isfinite(step)  # in the narrowed bracket
        if not inside.all():
            right = x >= hi  # the iterate is the bracket's upper end
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                other = np.where(right, _newton_step(lo, ends[0], ends[1], ends[2], E),
                                 _newton_step(hi, ends[3], ends[4], ends[5], E))
                # bisection, geometric across a bracket of more than a factor of 4, decades down from hi
                # while nothing below the root is known
                mid = np.where(lo > 0.0, np.where(hi > 4.0 * lo, np.sqrt(lo * hi), 0.5 * (lo + hi)), 0.01 * hi)
            other_in = (other > lo) & (other < hi) & np.isfinite(other)
            step = np.where(inside, step, np.where(other_in, other, mid))
        candidates = [step]
    x = candidates[0]
    x_out[active] = x
    quasi_static_out[active] = flow_stress(p + x, np.zeros_like(x))
    return x_out, quasi_static_out


def _flow_points(flow_stress, p, x, dt):
    """One call of the law for the return mapping: ``h = 1e-6 x`` and the flow stresses [Pa] at ``(p + x,
    x / dt)``, ``(p + x + h, (x + h) / dt)``, ``(p + x, 0)`` and ``(p + x + h, 0)``."""
    m = x.size
    h = 1e-6 * x  # x > 0 throughout: every iterate lies inside the bracket (0, |s_trial| / E)
    strains, rates = np.empty(4 * m), np.zeros(4 * m)
    np.add(p, x, out=strains[:m])
    np.add(strains[:m], h, out=strains[m:2 * m])
    strains[2 * m:] = strains[:2 * m]
    np.divide(x, dt, out=rates[:m])
    np.divide(x + h, dt, out=rates[m:2 * m])
    flow = np.asarray(flow_stress(strains, rates), dtype=float)
    return h, flow[:m], flow[m:2 * m], flow[2 * m:3 * m], flow[3 * m:]


def _narrow(lo, hi, ends, x, g, law_slope, E):
    """Narrow the bracket ``(lo, hi)`` around the root with a point ``x`` and its residual ``g``, in place,
    keeping the residual, slope and law slope at each end in ``ends``."""
    below = (g > 0.0) & (x > lo)
    above = (g <= 0.0) & (x < hi)
    np.copyto(lo, x, where=below)
    np.copyto(hi, x, where=above)
    for row, value in enumerate((g, E + law_slope, law_slope)):
        np.copyto(ends[row], value, where=below)
        np.copyto(ends[row + 3], value, where=above)


def _newton_step(x, g, slope, law_slope, E):
    """Newton step for ``g(x) = 0`` with ``g' = -slope``: on ``ln x`` where the law's slope exceeds E."""
    linear = x + g / slope
    on_log = law_slope > E
    if on_log.any():
        return np.where(on_log, x * np.exp(g / (slope * x)), linear)
    return linear


# --------------------------------------------------------------------------- specifications
@dataclass(frozen=True)
class RodSpec:
    """A uniform 1-D rod: striker, bar, pulse shaper or specimen.

    Attributes
    ----------
    length : float
        Length along the axis [m].
    diameter : float
        Diameter of the (circular) cross-section [m].
    modulus : float
        Young's modulus E [Pa].
    density : float
        Density rho [kg/m^3].
    law : object or callable or None
        None: linear elastic. Otherwise a plastic law with a
        ``flow_stress(plastic_strain [1], plastic_strain_rate [1/s]) -> Pa`` method
        (:class:`PerfectlyPlastic`, :class:`JohnsonCookLaw`,
        :class:`FlowStressLaw`) or a bare callable of that signature.
    """

    length: float
    diameter: float
    modulus: float
    density: float
    law: object = None

    @property
    def area(self) -> float:
        """Cross-section area [m^2]."""
        return math.pi * self.diameter**2 / 4.0

    @property
    def wave_speed(self) -> float:
        """Elastic bar wave speed c0 = sqrt(E/rho) [m/s]."""
        return math.sqrt(self.modulus / self.density)

    @property
    def impedance(self) -> float:
        """Mechanical impedance Z = rho c0 A [kg/s]."""
        return self.density * self.wave_speed * self.area


def bar_rod(bar) -> "RodSpec":
    """The model rod of a bar set's bar (:class:`shpb.setup.Bar`): its length, diameter and modulus, and the
    density E / c0**2 that gives it the bar's wave speed (the measured one when the bar set or its calibration
    has one), so that the model's waves travel as the reduction assumes."""
    c = bar.wave_speed
    return RodSpec(bar.length, bar.diameter, bar.modulus, bar.modulus / c**2)


@dataclass(frozen=True, kw_only=True)
class VirtualShotSpec:
    """Everything one virtual shot needs (SI units).

    Attributes
    ----------
    striker : RodSpec or None
        Striker bar (elastic); None when ``incident_pulse`` drives the
        incident bar instead.
    incident : RodSpec
        Incident bar (elastic).
    transmitted : RodSpec or None
        Transmitted bar (elastic); None for a free-end shot (the incident
        bar alone, its specimen-side end free; needs ``specimen=None``).
    specimen : RodSpec or None
        Specimen between the bars; None for a bars-together shot.
    striker_speed : float
        Impact speed of the striker [m/s] (> 0; not used with ``incident_pulse``).
    incident_gauge_distance : float
        Gauge station on the incident bar, distance from its specimen face [m].
    transmitted_gauge_distance : float
        Gauge station on the transmitted bar, distance from its specimen face [m].
    duration : float
        Record length after impact [s].
    sample_rate : float
        Recorder sample rate [Hz].
    shaper : RodSpec or None
        Pulse shaper on the impact face of the incident bar (between striker
        and incident bar, where shapers are placed in practice).
    specimen_elements : int
        Elements across the specimen length (>= 20).
    shaper_elements : int
        Elements across the shaper thickness (>= 4).
    max_time_step : float
        Upper bound on the model time step [s]; it sets the bar element
        length ``c0 dt`` when no specimen or shaper asks for a finer one.
    foot_fraction : float
        The incident foot enters the incident bar at the first step where the
        force it receives exceeds this fraction of its maximum [1]; matters
        only with a shaper or a prescribed pulse (without one the force jumps
        at the impact).
    incident_pulse : IncidentPulse or None
        A prescribed wave entering the incident bar at its impact face, in
        place of the striker and shaper (which must then be None): the face
        is driven by the force ``E A eps(t)`` and is free once the pulse has
        passed. Used to send a dispersed pulse into the non-dispersive model
        bar (see :func:`incident_pulse`).
    incident_stations, transmitted_stations : tuple of float
        Further gauge stations on each bar, distances from its specimen face
        [m] (for two-point wave separation). The bars keep the histories of
        their two travelling waves, so a station costs a read, not a step:
        each is returned in :attr:`VirtualShotResult.stations` as
        ``incident_2``, ``incident_3``, ... (``transmitted_2``, ...), the
        main gauges being station 1.
    """

    striker: Optional[RodSpec]
    incident: RodSpec
    transmitted: Optional[RodSpec]
    specimen: Optional[RodSpec]
    striker_speed: float
    incident_gauge_distance: float
    transmitted_gauge_distance: float
    duration: float
    sample_rate: float
    shaper: Optional[RodSpec] = None
    specimen_elements: int = 20
    shaper_elements: int = 10
    max_time_step: float = 0.1e-6
    foot_fraction: float = 1e-3
    incident_pulse: Optional["IncidentPulse"] = None
    incident_stations: tuple = ()
    transmitted_stations: tuple = ()


@dataclass(frozen=True, eq=False)
class IncidentPulse:
    """A strain wave entering the incident bar at its impact face.

    The face is driven by the force ``E A eps(t)`` (a whole element's mass on
    the end node, which makes a force-driven Courant-1 end exact); the work
    this force does is not part of ``VirtualShotResult.energies``, whose
    total then grows while the pulse enters.

    Attributes
    ----------
    dt : float
        Sample interval [s].
    strain : ndarray
        Bar strain of the wave [1], compression positive, sample k at model
        time ``k dt``; zero after the last sample.
    impact_time : float
        Model time at which the striker would have struck [s]: the pulse may
        start with a lead of zeros (room for a dispersed front), which delays
        the whole shot by this much.
    """

    dt: float
    strain: np.ndarray
    impact_time: float = 0.0


#: The columns of ``VirtualShotResult.truth`` (units in the names), in order.
TRUTH_COLUMNS = ("time_us", "stress_MPa", "strain", "strain_rate_per_s", "force_front_kN", "force_back_kN")


@dataclass
class VirtualShotResult:
    """What a virtual shot returns.

    Attributes
    ----------
    time : ndarray
        Record time [s], t = 0 at impact.
    strain_incident_gauge, strain_transmitted_gauge : ndarray
        Bar strain at the two gauge stations [1], compression positive
        (the transmitted one NaN in a free-end shot).
    foot_arrival_time : float
        Record time at which the incident wave's foot reaches the specimen
        front face (the incident bar's specimen-side end) [s]: the time it
        enters the incident bar plus the modelled bar length over c0. With a
        specimen, the specimen starts to load up to ``dt / 2`` earlier (see
        the module notes on bar ends).
    truth : pandas.DataFrame
        (A property, built on first use from ``truth_columns``.) On the
        shifted time base (t = 0 at ``foot_arrival_time``), one row per
        sample: ``time_us``; ``stress_MPa`` (mean of the specimen element
        stresses, engineering, compression positive); ``strain`` (mean
        engineering strain); ``strain_rate_per_s`` ((v_front - v_back)/L_s);
        ``force_front_kN``, ``force_back_kN`` (contact forces on the incident-
        and transmitted-bar faces, compression positive). Specimen columns
        are NaN for a bars-together shot.
    energies : pandas.DataFrame
        (A property, built on first use from ``energy_columns``.)
        ``time_us`` (shifted), ``kinetic_J``, ``strain_J`` (recoverable
        elastic), ``plastic_J`` (work dissipated by plastic flow so far),
        ``total_J``; kinetic energy in the leapfrog-consistent form
        ``sum m v(n-1/2) v(n+1/2) / 2``.
    grid : dict
        ``dt_s``, ``steps``, ``steps_per_sample``, ``nodes``,
        ``initial_kinetic_J`` and, per rod under ``rods``: ``elements``,
        ``element_length_m``, ``length_m`` (modelled, face to face),
        ``courant``; for the specimen and shaper also ``peak_strain`` (largest
        mean engineering compression) and ``peak_element_strain``.
    spec : VirtualShotSpec
        The input.
    gauge_waves : dict
        The bar strain at each gauge station split into the two waves that
        cross it [1], compression positive, on ``time``:
        ``incident_toward_specimen`` and ``incident_away_from_specimen``
        (incident bar), ``transmitted_away_from_specimen`` and
        ``transmitted_toward_specimen`` (transmitted bar; NaN without one).
        Each pair sums to the strain at the station; see
        :func:`_directional_weights` for the exact discrete split.
    stations : dict
        The further gauge stations of the spec (``incident_2``, ...,
        ``transmitted_2``, ...; see ``VirtualShotSpec.incident_stations``),
        each a dict of ``bar``, ``distance_m`` (from its specimen face), ``strain``
        (the bar strain there [1], compression positive, on ``time``) and
        its split into ``toward_specimen`` and ``away_from_specimen`` [1].
    truth_columns, energy_columns : dict
        The columns of ``truth`` and ``energies`` (name -> array), for a
        caller that does without pandas (``shpb simulate`` does not import it).
        ``energy_columns`` is a property, computed on first use by
        ``energy_source`` (the delay lines' energies cost more than a virtual
        record needs).
    energy_source : callable
        Returns ``energy_columns``.
    """

    time: np.ndarray
    strain_incident_gauge: np.ndarray
    strain_transmitted_gauge: np.ndarray
    foot_arrival_time: float
    truth_columns: dict = field(repr=False)
    energy_source: Callable[[], dict] = field(repr=False)
    grid: dict
    spec: VirtualShotSpec = field(repr=False)
    gauge_waves: dict = field(default_factory=dict, repr=False)
    stations: dict = field(default_factory=dict, repr=False)

    @functools.cached_property
    def truth(self):
        """The specimen truth as a DataFrame (see the class notes)."""
        import pandas as pd

        return pd.DataFrame(self.truth_columns)

    @functools.cached_property
    def energy_columns(self):
        """The columns of ``energies`` (see the class notes), computed on first use."""
        return self.energy_source()

    def __getstate__(self):
        """Pickled (a process pool's result, a saved sweep) with the energy columns computed: the source is a
        closure over the run, which does not pickle."""
        state = self.__dict__.copy()
        columns = self.energy_columns
        state["energy_columns"] = columns
        state["energy_source"] = functools.partial(dict, columns)
        return state

    @functools.cached_property
    def energies(self):
        """The energy balance as a DataFrame (see the class notes)."""
        import pandas as pd

        return pd.DataFrame(self.energy_columns)


# --------------------------------------------------------------------------- validation & grid
def _is_number(value):
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def _check_rod(rod, name):
    if not isinstance(rod, RodSpec):
        raise InputError(f"expected a RodSpec, got {type(rod).__name__}", f"VirtualShotSpec.{name}")
    for attr in ("length", "diameter", "modulus", "density"):
        value = getattr(rod, attr)
        if not (_is_number(value) and math.isfinite(value) and value > 0):
            raise InputError(f"expected a positive finite {attr}, got {value!r}", f"VirtualShotSpec.{name}.{attr}")
    return _as_law(rod.law, f"VirtualShotSpec.{name}.law")


def _check_spec(spec):
    laws = {}
    driven = spec.incident_pulse is not None
    if driven:
        if spec.striker is not None or spec.shaper is not None:
            raise InputError("a prescribed incident pulse replaces the striker and the shaper: set both to None",
                             "VirtualShotSpec.incident_pulse")
        pulse = spec.incident_pulse
        strain = np.asarray(getattr(pulse, "strain", None), dtype=float)
        if not (_is_number(getattr(pulse, "dt", None)) and pulse.dt > 0 and strain.ndim == 1 and strain.size > 1
                and np.all(np.isfinite(strain))):
            raise InputError("expected an IncidentPulse with dt > 0 and a finite 1-D strain array",
                             "VirtualShotSpec.incident_pulse")
    elif spec.striker is None:
        raise InputError("expected a striker (or an incident_pulse)", "VirtualShotSpec.striker")
    for name in ("striker", "incident"):
        if getattr(spec, name) is not None:
            laws[name] = _check_rod(getattr(spec, name), name)
    if spec.transmitted is None and spec.specimen is not None:
        raise InputError("a specimen needs a transmitted bar (transmitted=None is a free-end shot)",
                         "VirtualShotSpec.transmitted")
    for name in ("transmitted", "specimen", "shaper"):
        if getattr(spec, name) is not None:
            laws[name] = _check_rod(getattr(spec, name), name)
    for name in ("striker_speed", "duration", "sample_rate", "max_time_step"):
        if name == "striker_speed" and driven:
            continue
        value = getattr(spec, name)
        if not (_is_number(value) and math.isfinite(value) and value > 0):
            raise InputError(f"expected a positive finite number, got {value!r}", f"VirtualShotSpec.{name}")
    for name, bar in (("incident_gauge_distance", spec.incident), ("transmitted_gauge_distance", spec.transmitted)):
        if bar is None:
            continue
        d = getattr(spec, name)
        if not (_is_number(d) and 0 <= d <= bar.length):
            raise InputError(f"expected a distance from the specimen face within the bar (0 to {bar.length} m), "
                             f"got {d!r}", f"VirtualShotSpec.{name}")
    for name, bar in (("incident_stations", spec.incident), ("transmitted_stations", spec.transmitted)):
        stations = getattr(spec, name)
        if stations and bar is None:
            raise InputError("stations on a bar the shot does not have", f"VirtualShotSpec.{name}")
        for d in stations:
            if not (_is_number(d) and 0 <= d <= bar.length):
                raise InputError(f"expected distances from the specimen face within the bar (0 to {bar.length} m), "
                                 f"got {d!r}", f"VirtualShotSpec.{name}")
    if spec.specimen is not None and int(spec.specimen_elements) < 20:
        raise InputError(f"expected at least 20 specimen elements, got {spec.specimen_elements}",
                         "VirtualShotSpec.specimen_elements")
    if spec.shaper is not None and int(spec.shaper_elements) < 4:
        raise InputError(f"expected at least 4 shaper elements, got {spec.shaper_elements}",
                         "VirtualShotSpec.shaper_elements")
    if not 0 <= spec.foot_fraction < 1:
        raise InputError(f"expected 0 <= foot_fraction < 1, got {spec.foot_fraction}", "VirtualShotSpec.foot_fraction")
    return laws


def _time_step(spec):
    """Common time step [s].

    The finely resolved rods (specimen, shaper) must run at Courant <= 1 with
    at least their minimum element count; the most demanding one sets ``dt``
    and runs at Courant exactly 1 (exact for its elastic waves). Without such
    a rod, ``dt`` divides the sample interval and is at most ``max_time_step``.
    """
    dt_resolved = min((rod.length / int(n) / rod.wave_speed
                       for rod, n in ((spec.specimen, spec.specimen_elements), (spec.shaper, spec.shaper_elements))
                       if rod is not None), default=math.inf)
    if dt_resolved < spec.max_time_step:
        return dt_resolved
    interval = 1.0 / spec.sample_rate
    return interval / math.ceil(interval / spec.max_time_step - 1e-9)


@dataclass
class _Rod:
    """One rod of the chain on the grid: ``n`` elements between nodes ``node0 .. node0 + n``.

    A bar or striker (Courant 1) that touches a finely resolved rod (specimen
    or shaper) carries a whole element mass on that end node instead of half:
    its face then lies half an element beyond the node (``cap_start`` /
    ``cap_end``), which makes a force-driven end exact at Courant 1 (a
    half-mass end driven by a force step excites the grid's odd-even mode).
    """

    name: str
    spec: RodSpec
    law: object
    n: int  # elements
    dx: float
    node0: int  # first global node; element i of the rod is global link node0 + i
    cap_start: bool = False
    cap_end: bool = False

    @property
    def links(self):
        return slice(self.node0, self.node0 + self.n)

    @property
    def last_node(self):
        return self.node0 + self.n

    @property
    def length(self):
        """Modelled length [m], face to face."""
        return (self.n + 0.5 * (self.cap_start + self.cap_end)) * self.dx


def _build_rods(spec, laws, dt):
    chain = [] if spec.striker is None else [("striker", spec.striker, None)]
    if spec.shaper is not None:
        chain.append(("shaper", spec.shaper, int(spec.shaper_elements)))
    chain.append(("incident", spec.incident, None))
    if spec.specimen is not None:
        chain.append(("specimen", spec.specimen, int(spec.specimen_elements)))
    if spec.transmitted is not None:
        chain.append(("transmitted", spec.transmitted, None))
    resolved = [n is not None for _, _, n in chain]
    rods, node0 = [], 0
    for k, (name, rod, n) in enumerate(chain):
        # a bar end driven by a force carries a whole element: the resolved neighbour's, or the prescribed pulse
        cap_start = n is None and (resolved[k - 1] if k > 0 else spec.incident_pulse is not None)
        cap_end = n is None and k + 1 < len(chain) and resolved[k + 1]
        if n is None:  # bar or striker: Courant exactly 1, length rounded to whole elements
            dx = rod.wave_speed * dt
            n = max(1, int(round(rod.length / dx - 0.5 * (cap_start + cap_end))))
        else:  # resolved rod: as many elements (>= the minimum) as keep its Courant number <= 1
            n = max(n, int(math.floor(rod.length / (rod.wave_speed * dt) + 1e-9)))
            dx = rod.length / n
        # consecutive rods are joined by a dummy link (global index node0 - 1) of zero stiffness;
        # they interact only through the contact impulses
        rods.append(_Rod(name, rod, laws.get(name), n, dx, node0, cap_start, cap_end))
        node0 += n + 1
    return rods


# --------------------------------------------------------------------------- the model
def simulate_shot(spec: VirtualShotSpec) -> VirtualShotResult:
    """Simulate one pressure-bar shot with a 1-D wave-propagation model.

    Parameters
    ----------
    spec : VirtualShotSpec
        Rig, specimen, striker speed [m/s], gauge stations [m], record length
        [s] and sample rate [Hz].

    Returns
    -------
    VirtualShotResult
        Gauge strain histories (compression positive) on the record time base
        (t = 0 at impact), the incident foot arrival time at the specimen
        front face [s], the specimen truth and the energy balance on the
        shifted time base.

    Notes
    -----
    See the module docstring for the scheme (staggered leapfrog, Courant 1
    in the bars, compression-only contacts, radial return, engineering
    quantities in the specimen). A striker of the bar's material and
    diameter gives an incident strain ``v / (2 c0)`` lasting ``2 L / c0``
    (Kolsky 1949); in general ``(v / c_b) Z_s / (Z_s + Z_b)`` with
    ``Z = rho c0 A``.

    References
    ----------
    .. [1] H. Kolsky, Proc. Phys. Soc. B 62 (1949) 676-700,
       doi:10.1088/0370-1301/62/11/302.
    .. [2] K. F. Graff, Wave Motion in Elastic Solids, 1975, ch. 2.
    """
    return _shot(spec)


def _shot(spec, incident_wave_only=False):
    """:func:`simulate_shot`; with ``incident_wave_only`` (for :func:`incident_pulse`) the march stops at the
    last step the incident gauge's wave travelling toward the specimen needs (the incident bar is a delay line),
    and only that wave, ``time`` and ``grid`` of the result hold the shot's values."""
    laws = _check_spec(spec)
    dt = _time_step(spec)
    rods = _build_rods(spec, laws, dt)
    # recorder clock: the model keeps the two steps around each sample time, then interpolates
    t_samples = np.arange(int(math.floor(spec.duration * spec.sample_rate + 1e-9)) + 1) / spec.sample_rate
    lower = np.floor(t_samples / dt + 1e-9).astype(np.int64)
    kept_steps = np.union1d(lower, lower + 1)
    rec, impact_force, e0, peak, stations, line_energies = _run(spec, rods, dt, kept_steps, incident_wave_only)
    for name, (value, _) in peak.items():
        if value >= 1.0:
            raise AnalysisError(f"the {name} was crushed to zero length (engineering strain {value:.2f}); the "
                                f"small-strain model does not hold: shorten the record or soften the impact")
    return _assemble(spec, rods, dt, t_samples, rec, impact_force, e0, peak, stations, line_energies)


# --------------------------------------------------------------------------- the solver
#: Rods that run at Courant number exactly 1 (``_build_rods``); elastic ones are solved as delay lines.
_COURANT_ONE = ("striker", "incident", "transmitted")
#: Steps of grid state kept at a time before they are reduced to the recorded quantities.
_CHUNK = 1024
#: Largest grid state (values) stepped by one matrix product (_Grid.step_matrix) rather than by differences.
_DENSE_SIZE = 160
#: Newton steps a flowing element may take after the first before the general iteration takes over
#: (_PlasticState; a virtual shot's stress relaxation after unloading needs two or three where the load turns).
_EXTRA_NEWTON = 3
# _PlasticState._newton_from: the law's arguments as multiples of the increment x, rows (x, x + h) at the
# plastic rate x / dt and at zero rate, h = 1e-6 x
_STEP_FACTORS = np.array([1.0, 1.0 + 1e-6, 1.0, 1.0 + 1e-6])[:, None]
_RATE_FACTORS = np.array([1.0, 1.0 + 1e-6, 0.0, 0.0])[:, None]
# reductions of the small arrays of the time stepping, called directly (ndarray.max() and the like add a
# Python layer that costs more than the reduction itself on a specimen's 20 elements)
_max, _min, _any, _all = np.maximum.reduce, np.minimum.reduce, np.logical_or.reduce, np.logical_and.reduce


class _DelayLine:
    """An elastic rod at Courant number 1, solved exactly as two shift registers of its travelling waves.

    At Courant 1 the staggered scheme of a uniform rod is the d'Alembert
    solution on the grid: with ``R_j(n)`` the strain of the wave travelling
    +x in element j at step n and ``L_j(n)`` that of the wave travelling -x
    (tension positive), an element's strain is ``R_j + L_j``, an interior
    node's velocity is ``v_j(n+1/2) = c0 (L_j(n) - R_(j-1)(n))``, and each
    step every wave moves one element unchanged: ``R_j(n+1) = R_(j-1)(n)``,
    ``L_j(n+1) = L_(j+1)(n)`` (substitute into the update
    ``v_j += c0 (eps_j - eps_(j-1))``, ``eps_j += (v_(j+1) - v_j) / c0``).
    Only the two end nodes are integrated: they carry the rod's end masses
    and meet the contacts, the drive or a free end (:func:`_run`), and the
    wave each sends in follows from its velocity,
    ``R_0(n+1) = L_0(n) - v_0(n+1/2) / c0`` and
    ``L_(N-1)(n+1) = R_(N-1)(n) + v_N(n+1/2) / c0`` (the same update at the
    end elements). The results are those of the node-by-node march, to
    round-off, at a cost independent of the rod's length.

    Storage: ``R_j(n) = right[N + n - j]`` and ``L_j(n) = left[n + j]``, so
    the whole history stays available for the records and energies after the
    run. The end nodes belong to :func:`_run`.

    References
    ----------
    .. [1] K. F. Graff, Wave Motion in Elastic Solids, Oxford Univ. Press,
       1975, ch. 2 (d'Alembert solution; v = -c0 eps for a wave travelling +x).
    """

    def __init__(self, rod: _Rod, n_steps: int, speed: float = 0.0):
        self.rod = rod
        self.N = N = rod.n
        self.c = rod.spec.wave_speed
        self.EA = rod.spec.modulus * rod.spec.area
        # Python lists while marching (one element read or written at a time), arrays after (finish)
        # a rod moving at `speed` without strain: eps = R + L = 0 and v = c0 (L - R) = speed
        self.right = [-speed / (2.0 * self.c)] * (N + 1) + [0.0] * (n_steps + 1)
        self.left = [speed / (2.0 * self.c)] * N + [0.0] * (n_steps + 2)

    def finish(self):
        """The histories as arrays, for the records."""
        self.right, self.left = np.array(self.right), np.array(self.left)

    def strain(self, j, steps):
        """Strain of element j [1] at the given steps, tension positive."""
        return self.right[self.N + steps - j] + self.left[steps + j]

    def node_waves(self, j, steps):
        """The two travelling waves at interior node j [1], tension positive: each one's mean over the
        two elements beside the node, ``(R_(j-1) + R_j) / 2`` and ``(L_(j-1) + L_j) / 2``.

        In the grid's variables (``v_j = c0 (L_j - R_(j-1))``, element j right
        of node j) these are ``(eps_j - v_j / c0) / 2`` and
        ``(eps_(j-1) + v_j / c0) / 2``, and their sum is the mean strain at
        the node: the split is exact on the grid, not an approximation of it
        (the form :func:`_bar_measures` uses on a bar marched on the grid).
        """
        R, L, N = self.right, self.left, self.N
        return 0.5 * (R[N + steps - j] + R[N + steps - j + 1]), 0.5 * (L[steps + j - 1] + L[steps + j])

    def strain_mean_and_min(self, steps, chunk=4096):
        """Mean and smallest element strain [1] at the given steps, tension positive."""
        N, R, L = self.N, self.right, self.left
        j = np.arange(N)
        mean, low = np.empty(steps.size), np.empty(steps.size)
        for start in range(0, steps.size, chunk):
            k = steps[start:start + chunk, None]
            strains = R[N + k - j] + L[k + j]
            mean[start:start + chunk] = strains.mean(axis=1)
            low[start:start + chunk] = strains.min(axis=1)
        return mean, low

    def energies(self, n_steps):
        """Kinetic energy of the interior nodes and strain energy of the elements [J] at steps 0..n_steps.

        The same discrete energies as the node-by-node march (kinetic
        ``m v(n-1/2) v(n+1/2) / 2`` per node, strain ``F**2 dx / (2 EA)`` per
        element), written in the waves: with ``m c0**2 = EA dx`` and
        ``a_k = R`` history, ``b_k = L`` history,

            strain  = EA dx / 2 * sum_j (R_j + L_j)**2
            kinetic = EA dx / 2 * sum_(j=1..N-1) (L_j(n-1) - R_(j-1)(n-1)) (L_j(n) - R_(j-1)(n)).

        Squares and lag products are window sums (cumulative sums); the
        cross term ``sum_j R_j(n) L_j(n)`` pairs the two histories along
        anti-diagonals and is computed for every step at once
        (:func:`_band_pair_sums`).
        """
        N, R, L = self.N, self.right, self.left
        k = np.arange(n_steps + 1)

        def cumulative(x):
            return np.concatenate(([0.0], np.cumsum(x)))

        r2, l2 = cumulative(R * R), cumulative(L * L)
        r_lag, l_lag = cumulative(R[:-1] * R[1:]), cumulative(L[:-1] * L[1:])
        sum_r2 = r2[N + k + 1] - r2[k + 1]  # right[k+1 .. N+k]: R_j(k) for j = N-1 .. 0
        sum_l2 = l2[k + N] - l2[k]  # left[k .. k+N-1]
        sum_r_lag = r_lag[k + N] - r_lag[k + 1]  # R_(j-1)(k) R_j(k) for j = 1 .. N-1
        sum_l_lag = l_lag[k + N - 1] - l_lag[k]
        # cross term: right[N+k-j] left[k+j] = x[u] y[m] with x = right[1:], y = N-1 zeros then left:
        # u = N+k-j-1, m = k+j+N-1, u + m = 2k + 2N - 2, m - u = 2j in [0, 2N - 2]
        x = R[1:N + n_steps + 1]
        y = np.concatenate((np.zeros(N - 1), L[:N + n_steps]))
        cross = _band_pair_sums(x, y, 0, 2 * N - 2)[2 * k + 2 * N - 2]
        half = 0.5 * self.EA * self.rod.dx
        strain = half * (sum_r2 + sum_l2 + 2.0 * cross)
        kinetic = half * (sum_l_lag + sum_r_lag - 2.0 * cross + R[k + 1] * L[k + N - 1] + R[N + k] * L[k])
        return kinetic, strain


def _upper_pair_sums(x, y):
    """``out[..., s] = sum of x[..., u] y[..., m] over u <= m, u + m = s``, s = 0 .. 2 n - 2, along the last
    axis (x and y of one shape, n long).

    Divide and conquer over the index range: the pairs with u in the left
    half of a block and m in its right half all count, and are one linear
    convolution (by FFT, batched over the blocks of a level); the pairs within
    a half are left to the next level down, and the smallest blocks are summed
    directly. O(n log^2 n).
    """
    rows, size = x.shape[:-1], x.shape[-1]
    base = 4
    total = base * 2 ** max(0, math.ceil(math.log2(max(size, 1) / base)))
    xp, yp = np.zeros(rows + (total,)), np.zeros(rows + (total,))
    xp[..., :size], yp[..., :size] = x, y
    out = np.zeros(rows + (3 * total,))
    r = np.arange(base)
    upper = r[:, None] <= r[None, :]
    blocks = total // base
    prod = (xp.reshape(rows + (blocks, base, 1)) * yp.reshape(rows + (blocks, 1, base)))[..., upper]
    where = ((2 * base) * np.arange(blocks))[:, None] + (r[:, None] + r[None, :])[upper][None, :]
    flat = out.reshape(-1, 3 * total)
    for i, part in enumerate(prod.reshape(-1, blocks, prod.shape[-1])):
        flat[i, :2 * total] = np.bincount(where.ravel(), part.ravel(), minlength=2 * total)
    half = base
    while half < total:
        blocks = total // (2 * half)
        left = xp.reshape(rows + (blocks, 2 * half))[..., :half]
        right = yp.reshape(rows + (blocks, 2 * half))[..., half:]
        conv = np.fft.irfft(np.fft.rfft(left, 2 * half) * np.fft.rfft(right, 2 * half), 2 * half)
        # u = 2 half b + i, m = 2 half b + half + k  ->  s = 4 half b + half + i + k
        out[..., half:half + 4 * half * blocks].reshape(rows + (blocks, 4 * half))[..., :2 * half] += conv
        half *= 2
    return out[..., :2 * size - 1]


def _band_pair_sums(x, y, lo, hi):
    """``out[s] = sum of x[u] y[m] over u + m = s, lo <= m - u <= hi``, s = 0 .. len(x) + len(y) - 2.

    Only the spans between the first and last non-zero values of ``x`` and
    ``y`` are paired (waves reach a bar's far part late, or never).
    """
    out = np.zeros(x.size + y.size - 1)
    nonzero_x, nonzero_y = np.flatnonzero(x), np.flatnonzero(y)
    if not nonzero_x.size or not nonzero_y.size:
        return out
    a0, b0 = nonzero_x[0], nonzero_y[0]
    xs, ys = x[a0:nonzero_x[-1] + 1], y[b0:nonzero_y[-1] + 1]
    lo, hi = max(lo - (b0 - a0), 1 - xs.size), min(hi - (b0 - a0), ys.size - 1)  # the band in the spans
    if hi < lo:
        return out
    # shift y so that the band starts at m - u = 0; then the pairs with m - u >= 0, minus those beyond the
    # band (m = m' + width + 1 with m' >= u, so u < len(far))
    shifted = ys[lo:] if lo >= 0 else np.concatenate((np.zeros(-lo), ys))
    width = hi - lo
    n = max(xs.size, shifted.size)
    xp, yp = np.zeros(n), np.zeros(n)
    xp[:xs.size], yp[:shifted.size] = xs, shifted
    core = _upper_pair_sums(xp, yp)
    far = yp[width + 1:]
    if far.size:
        core[width + 1:width + 2 * far.size] -= _upper_pair_sums(xp[:far.size], far)
    start = lo + a0 + b0
    if start < 0:
        core, start = core[-start:], 0
    stop = min(start + core.size, out.size)
    out[start:stop] = core[:stop - start]
    return out


class _Grid:
    """The rods marched node by node: the specimen, the shaper and any striker or bar with a plastic law.

    Their nodes and elements, rod after rod along the chain, in one state
    array ``[v (nodes), eps (links), 0, F (links), 0]``: a step's state is
    kept in one copy, and the node forces are one difference of the padded
    force array. Consecutive rods are joined by a link of zero stiffness:
    they interact only through the contact impulses (their end nodes are
    the contacts' business, see :func:`_run`).
    """

    def __init__(self, spec, rods, dt):
        self.first, self.last, self.links = {}, {}, {}
        mass, EA, dt_over_dx, dx_over_EA = [], [], [], []
        for r in rods:
            s = r.spec
            if mass:  # joint to the previous rod on the grid
                EA.append(0.0)
                dt_over_dx.append(0.0)
                dx_over_EA.append(0.0)
            m_el = s.density * s.area * r.dx
            self.first[r.name] = len(mass)
            mass += [0.5 * m_el * (1 + r.cap_start)] + [m_el] * (r.n - 1) + [0.5 * m_el * (1 + r.cap_end)]
            self.last[r.name] = len(mass) - 1
            self.links[r.name] = slice(len(EA), len(EA) + r.n)
            EA += [s.modulus * s.area] * r.n
            dt_over_dx += [dt / r.dx] * r.n
            dx_over_EA += [r.dx / (s.modulus * s.area)] * r.n
        self.mass = np.array(mass)
        self.dt_over_m = dt / self.mass if mass else self.mass
        self.EA, self.dt_over_dx, self.dx_over_EA = np.array(EA), np.array(dt_over_dx), np.array(dx_over_EA)
        self.n_nodes, self.n_links = len(mass), len(EA)
        nn, nl = self.n_nodes, self.n_links
        self.state = np.zeros(nn + 2 * nl + 2)
        self.v = self.state[:nn]
        self.eps = self.state[nn:nn + nl]
        self.F_pad = self.state[nn + nl:nn + 2 * nl + 2]  # a zero beyond each end
        self.F = self.F_pad[1:-1]
        if "striker" in self.first:
            self.v[self.first["striker"]:self.last["striker"] + 1] = spec.striker_speed

    def step_matrix(self, kicks):
        """The elastic step as one matrix on ``[state, 1]``: from the state after the contacts of step n
        (``v(n+1/2)``, ``eps(n)``, ``F(n)``) to the state of step n+1 before its contacts (``eps(n+1) = eps(n) +
        dt/dx (v_(j+1) - v_j)``, ``F(n+1) = EA eps(n+1)``, ``v(n+3/2) = v(n+1/2) + dt/m (F_j - F_(j-1))``); the
        last column holds the forces' offsets (:meth:`offset_setter`). Stored column by column, so that the
        last column is one contiguous array. ``kicks``: :meth:`node_kicks`."""
        nn, nl = self.n_nodes, self.n_links
        size = self.state.size
        M = np.zeros((size + 1, size + 1))
        links = np.arange(nl)
        eps_rows, F_rows = nn + links, nn + nl + 1 + links
        M[eps_rows, eps_rows] = 1.0
        M[eps_rows, links + 1] += self.dt_over_dx
        M[eps_rows, links] -= self.dt_over_dx
        M[F_rows] = self.EA[:, None] * M[eps_rows]
        M[:nn] = kicks @ M[nn + nl:nn + 2 * nl + 2]  # (the pads' rows are zero)
        M[np.arange(nn), np.arange(nn)] += 1.0
        M[size, size] = 1.0
        return np.asfortranarray(M)

    def node_kicks(self):
        """The matrix from the padded forces ``F_pad`` [N] to the node velocity changes over a step [m/s]:
        ``dt/m_j (F_j - F_(j-1))``."""
        nn = self.n_nodes
        K = np.zeros((nn, nn + 1 if nn else 0))
        K[np.arange(nn), np.arange(nn) + 1] = self.dt_over_m
        K[np.arange(nn), np.arange(nn)] = -self.dt_over_m
        return K

    def offset_setter(self, M, kicks, plastic):
        """A function that writes the plastic strains' offsets into the step matrix's last column:
        ``F = EA (eps - eps_p)``, and the node velocity changes they make (``kicks``: :meth:`node_kicks`)."""
        nn, nl = self.n_nodes, self.n_links
        column = M[:, -1]
        F_pad, nodes = column[nn + nl:nn + 2 * nl + 2], column[:nn]
        rods = []
        for p in plastic:
            links = self.links[p.rod.name]
            rods.append((p, -self.EA[links], F_pad[1 + links.start:1 + links.stop]))

        def set_offsets():
            for p, minus_EA, out in rods:
                np.multiply(minus_EA, p.eps_p, out=out)
            np.dot(kicks, F_pad, out=nodes)

        return set_offsets

    def column(self, kind, name, index):
        """Column of the state array holding node ``index`` (``kind = "v"``) or element ``index``
        (``"eps"``) of rod ``name``."""
        if kind == "v":
            return self.first[name] + index
        return self.n_nodes + self.links[name].start + index


def _run(spec, rods, dt, kept_steps, incident_wave_only=False):
    """March the model; return the kept rows, the force entering the incident bar, E0, peak strains.

    Per step: the grid's node velocities from its element forces and the
    delay lines' end nodes from their end elements' (the drive, if any, on
    the incident bar's impact face); the contact impulses between the end
    nodes of neighbouring rods; then the waves the delay lines' ends send in
    and the grid's element strains and forces (radial return in the plastic
    rods). The end nodes and the contacts are a handful of scalars, kept as
    Python floats; the grid is numpy. What the records need is read
    afterwards from the delay lines' histories and from the grid states,
    kept step by step.

    With ``incident_wave_only`` the march stops once the incident bar (a
    delay line) has sent in every wave its gauge's reading of the wave
    travelling toward the specimen needs, a bar transit before the last step
    (:meth:`_DelayLine.node_waves` reads ``R_j(n) = R_0(n - j)``); the other
    records are then left incomplete, the energies out.
    """
    by_name = {r.name: r for r in rods}
    n_steps = march = int(kept_steps[-1])
    if incident_wave_only:
        incident = by_name["incident"]
        j0 = _directional_weights(incident, spec.incident_gauge_distance, True)[0] - incident.node0
        march = max(0, n_steps - j0 + 1)
    # elastic rods at Courant 1: the bars and the striker, and the specimen or shaper when it sets the step
    lines = {r.name: _DelayLine(r, n_steps, spec.striker_speed if r.name == "striker" else 0.0) for r in rods
             if r.law is None and (r.name in _COURANT_ONE or abs(r.spec.wave_speed * dt / r.dx - 1.0) < 1e-12)}
    grid = _Grid(spec, [r for r in rods if r.name not in lines], dt)
    incident, striker = by_name["incident"], by_name.get("striker")
    e0 = 0.0
    if striker is not None:
        m_el = striker.spec.density * striker.spec.area * striker.dx
        e0 = 0.5 * m_el * (striker.n + 0.5 * (striker.cap_start + striker.cap_end)) * spec.striker_speed ** 2
    drive = None
    if spec.incident_pulse is not None:  # force on the impact face, compression pushing +x, per step
        p = spec.incident_pulse
        strain = np.asarray(p.strain, dtype=float)
        drive = incident.spec.modulus * incident.spec.area * np.interp(
            np.arange(n_steps + 1) * dt, np.arange(strain.size) * p.dt, strain, left=0.0, right=0.0)

    # the end nodes of every rod as Python floats: a delay line's own, a grid rod's copies of its grid nodes
    u, u_mass, ends, copies = [], [], {}, []
    for r in rods:
        m_el = r.spec.density * r.spec.area * r.dx
        for side, cap in (("first", r.cap_start), ("last", r.cap_end)):
            ends[r.name, side] = len(u)
            if r.name in lines:
                u.append(float(spec.striker_speed if r.name == "striker" else 0.0))
                u_mass.append(0.5 * m_el * (1 + cap))
            else:
                node = getattr(grid, side)[r.name]
                copies.append((len(u), node))
                u.append(float(grid.v[node]))
                u_mass.append(float(grid.mass[node]))
    line_steps = [(line.right, line.left, line.N, 1.0 / line.c, dt / u_mass[ends[name, "first"]] * line.EA,
                   dt / u_mass[ends[name, "last"]] * line.EA, ends[name, "first"], ends[name, "last"])
                  for name, line in lines.items()]
    # contacts between consecutive rods: (left rod's last node, right rod's first node, 1/m_a, 1/m_b, 1/w)
    contacts = []
    for a, b in zip(rods[:-1], rods[1:]):
        ia, ib = ends[a.name, "last"], ends[b.name, "first"]
        inv_a, inv_b = 1.0 / u_mass[ia], 1.0 / u_mass[ib]
        contacts.append((ia, ib, inv_a, inv_b, 1.0 / (dt * (inv_a + inv_b))))
    gaps = [0.0] * len(contacts)
    impulses = [[0.0] * (n_steps + 1) for _ in contacts]
    i_drive = ends["incident", "first"]
    drive_on_line = drive is not None and "incident" in lines
    drive_kick = (drive * (dt / u_mass[i_drive])).tolist() if drive_on_line else None
    plastic = [_PlasticState(r, grid.eps[grid.links[r.name]], grid.F[grid.links[r.name]]) for r in rods
               if r.law is not None]
    work = [0.0] * (n_steps + 1)
    reader = _GridReader(grid, rods, spec, n_steps)
    history = list(u)  # end node velocities, v(-1/2) first, one step after the other

    v, eps, F = grid.v, grid.eps, grid.F
    F_right, F_left, v_right, v_left = grid.F_pad[1:], grid.F_pad[:-1], v[1:], v[:-1]
    dt_over_m, dt_over_dx, EA = grid.dt_over_m, grid.dt_over_dx, grid.EA
    nn, nl = grid.n_nodes, grid.n_links
    node_force, dv = np.zeros(nn), np.zeros(nl)
    on_grid = nn > 0
    drive_on_grid = drive is not None and not drive_on_line
    i_grid_drive = grid.first.get("incident")
    # the plastic rods set their own forces: the elastic ones are needed only if the grid holds other rods
    elastic_forces = sum(p.rod.n for p in plastic) < nl
    contacts = [(k,) + c for k, c in enumerate(contacts)]
    state = grid.state
    # A small grid (a specimen, a shaper) takes its elastic step as one matrix product (Grid.step_matrix) on its
    # state and a trailing 1, written straight into the kept rows; a plastic rod then checks its forces (the sum
    # of squares against the smallest flow stress) and, where it may flow, takes the return mapping and the
    # node velocities are done again from its forces. A large grid (a bar with a plastic law) steps by its
    # differences, element by element.
    dense = on_grid and not drive_on_grid and state.size <= _DENSE_SIZE  # (a driven bar on the grid is large)
    kept = np.empty((_CHUNK, state.size + dense))
    row = 0
    if dense:
        kicks = grid.node_kicks()
        M = grid.step_matrix(kicks)
        set_offsets = grid.offset_setter(M, kicks, plastic)
        set_offsets()
        prev = carry = np.append(state, 1.0)  # the state before the march, with the trailing 1
        checks = [(p, grid.column("eps", p.rod.name, 0), nn + nl + 1 + grid.links[p.rod.name].start,
                   grid.links[p.rod.name].stop - grid.links[p.rod.name].start) for p in plastic]
        F_pad_cols = slice(nn + nl, nn + 2 * nl + 2)
    # A grid at rest (no velocity, no force) stays at rest until a contact on one of its end nodes closes: until
    # then its steps change nothing and are skipped (the reader's rows of those steps are zero already).
    resting = on_grid and not drive_on_grid and not state.any()
    grid_ends = {k for k, _ in copies}
    contacts = [c + (c[1] in grid_ends or c[2] in grid_ends,) for c in contacts]  # ... touches the grid
    woken = False  # an impulse on a grid end node
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):  # the return mapping brackets its steps
        for n in range(march + 1):
            # grid: strains n-1 -> n from v(n-1/2) (element forces, radial return in the plastic rods), then
            # nodes v(n-1/2) -> v(n+1/2) from the element forces at n
            if dense and not resting:
                cur = kept[row]
                np.dot(M, prev, out=cur)
                flowed = returned = False
                for p, e_col, f_col, m in checks:
                    forces = cur[f_col:f_col + m]
                    if np.dot(forces, forces) > p.force_squared and \
                            _max(np.abs(forces, out=p.size)) > p.force_limit:  # (size: a scratch array)
                        p.eps, p.F = cur[e_col:e_col + m], forces
                        flowed = p.flow_step(dt) or flowed
                        returned = True
                    elif p.aged:
                        p.settle()
                if returned:  # the node velocities from the returned forces
                    np.dot(kicks, cur[F_pad_cols], out=node_force)
                    np.add(prev[:nn], node_force, out=cur[:nn])
                    if flowed:
                        set_offsets()
                for k, node in copies:
                    u[k] = cur.item(node)
            elif on_grid and not resting:
                np.subtract(F_right, F_left, out=node_force)
                if drive_on_grid:
                    node_force[i_grid_drive] += drive[n]
                node_force *= dt_over_m
                v += node_force
                for k, node in copies:
                    u[k] = v.item(node)
            for R, L, N, _, kick_first, kick_last, first, last in line_steps:
                u[first] += kick_first * (R[N + n] + L[n])
                u[last] -= kick_last * (R[n + 1] + L[n + N - 1])
            if drive_on_line:
                u[i_drive] += drive_kick[n]
            # compression-only contacts: the impulse that stops the end nodes overlapping at n+1
            for k, a, b, inv_a, inv_b, inv_w, on_grid_end in contacts:
                va, vb = u[a], u[b]
                g = gaps[k] + dt * (vb - va)
                if g < 0.0:
                    impulse = -g * inv_w
                    u[a] = va - impulse * inv_a
                    u[b] = vb + impulse * inv_b
                    impulses[k][n] = impulse
                    gaps[k] = 0.0
                    woken = woken or on_grid_end
                else:
                    gaps[k] = g
            history += u
            if resting and woken and any(u[k] for k in grid_ends):
                resting = False
                if dense:
                    cur = kept[row]
                    cur[:] = prev
            if on_grid and not resting:
                if dense:
                    for k, node in copies:
                        cur[node] = u[k]
                else:
                    for k, node in copies:
                        v[node] = u[k]
                    kept[row] = state
                row += 1
                if row == _CHUNK or n == march:
                    reader.read(kept[:row, :state.size], n + 1 - row)
                    if dense:
                        prev = carry
                        prev[:] = kept[row - 1]
                    row = 0
                elif dense:
                    prev = cur
                for p in plastic:
                    work[n] += p.work
            if n == march:
                break
            # delay lines: the waves their end nodes send in at n+1
            for R, L, N, inv_c, _, _, first, last in line_steps:
                R[N + n + 1] = L[n] - u[first] * inv_c
                L[n + N] = R[n + 1] + u[last] * inv_c
            # grid elements (by differences): strain n -> n+1 from v(n+1/2); elastic forces, then the plastic rods
            if on_grid and not resting and not dense:
                np.subtract(v_right, v_left, out=dv)
                dv *= dt_over_dx
                eps += dv
                if elastic_forces:
                    np.multiply(EA, eps, out=F)
                for p in plastic:
                    p.update(dt)

    history += u * (n_steps - march)  # (incident_wave_only: the steps not marched)
    for line in lines.values():
        line.finish()
    left_of = {rods[i + 1].name: i for i in range(len(rods) - 1)}  # contact on the left of each rod
    impulses = np.array(impulses).reshape(len(gaps), n_steps + 1)
    impact_force = drive if drive is not None else impulses[left_of["incident"]] / dt
    # kinetic energy of the delay lines' end nodes (leapfrog form m v(n-1/2) v(n+1/2) / 2)
    history = np.array(history).reshape(n_steps + 2, len(u))
    own = np.array([k for name in lines for k in (ends[name, "first"], ends[name, "last"])], dtype=np.int64)
    end_kinetic = 0.5 * (history[:-1, own] * np.array(u_mass)[own] * history[1:, own]).sum(axis=1) if own.size \
        else np.zeros(n_steps + 1)
    faces = {name: (history[:, ends[name, "first"]], history[:, ends[name, "last"]]) for name in lines}
    rec, peak, line_energies = _records(spec, by_name, lines, grid, reader, impulses, np.array(work), end_kinetic,
                                        faces, left_of,
                                        dt, kept_steps, energies=not incident_wave_only)
    stations = _station_records(spec, by_name, lines, reader, kept_steps)
    return rec, impact_force, e0, peak, stations, line_energies


class _GridReader:
    """Reduces the kept grid states, chunk by chunk, to what the records need at every step."""

    def __init__(self, grid: _Grid, rods, spec, n_steps):
        self.grid = grid
        self.previous_v = grid.v.copy()  # v(-1/2): the initial velocities
        self.kinetic = np.zeros(n_steps + 1)
        self.strain_energy = np.zeros(n_steps + 1)
        self.resolved = [r.name for r in rods if r.name in ("specimen", "shaper") and r.name in grid.links]
        self.mean_strain = {name: np.zeros(n_steps + 1) for name in self.resolved}
        self.min_strain = {name: np.zeros(n_steps + 1) for name in self.resolved}
        self.mean_force = {name: np.zeros(n_steps + 1) for name in self.resolved}
        self.columns = {}  # (kind, rod, index) -> position in self.probes
        wanted = []
        if "specimen" in grid.links:
            wanted += [("v", "specimen", 0), ("v", "specimen", grid.links["specimen"].stop
                                                    - grid.links["specimen"].start)]
        for name, distance, from_end in _all_stations(spec):
            if name in grid.links:  # a bar with a plastic law is marched on the grid
                rod = next(r for r in rods if r.name == name)
                i0, i1, _, _ = _gauge_weights(rod, distance, from_end)
                j0, j1, _, _, _ = _directional_weights(rod, distance, from_end)
                for j in (j0, j1):
                    wanted += [("v", name, j - rod.node0), ("eps", name, j - rod.node0),
                               ("eps", name, j - 1 - rod.node0)]
                wanted += [("eps", name, i0 - rod.node0), ("eps", name, i1 - rod.node0)]
        for key in wanted:
            self.columns.setdefault(key, len(self.columns))
        self.probe_index = np.array([grid.column(*key) for key in self.columns], dtype=np.int64)
        self.probes = np.zeros((n_steps + 1, len(self.columns)))

    def read(self, states, start):
        """Take the grid states of steps ``start ..`` (one row per step)."""
        g = self.grid
        nn, nl = g.n_nodes, g.n_links
        stop = start + states.shape[0]
        v = states[:, :nn]
        v_before = np.vstack((self.previous_v[None, :], v[:-1]))
        self.previous_v = v[-1].copy()
        self.kinetic[start:stop] = 0.5 * ((v_before * g.mass) * v).sum(axis=1)
        F = states[:, nn + nl + 1:nn + 2 * nl + 1]
        self.strain_energy[start:stop] = 0.5 * (F * F * g.dx_over_EA).sum(axis=1)
        for name in self.resolved:
            sl = g.links[name]
            e = states[:, nn + sl.start:nn + sl.stop]
            self.mean_strain[name][start:stop] = e.mean(axis=1)
            self.min_strain[name][start:stop] = e.min(axis=1)
            self.mean_force[name][start:stop] = F[:, sl].mean(axis=1)
        if self.probe_index.size:
            self.probes[start:stop] = states[:, self.probe_index]

    def probe(self, kind, name, index, steps):
        return self.probes[steps, self.columns[(kind, name, index)]]


def _bar_measures(name, rod, lines, reader, distance, from_end, steps):
    """Gauge strain and the two travelling waves at a bar's station [1], compression positive, at ``steps``.

    Returns ``strain, plus, minus`` (waves travelling +x and -x). On a delay
    line, read from its histories; on a bar marched on the grid, from the
    kept states (the split of :func:`_directional_weights`, exact at a node).
    """
    i0, i1, w0, w1 = _gauge_weights(rod, distance, from_end)
    j0, j1, u0, u1, c = _directional_weights(rod, distance, from_end)
    i0, i1, j0, j1 = i0 - rod.node0, i1 - rod.node0, j0 - rod.node0, j1 - rod.node0
    line = lines.get(name)
    if line is not None:
        strain = w0 * line.strain(i0, steps) + w1 * line.strain(i1, steps)
        (r0, l0), (r1, l1) = line.node_waves(j0, steps), line.node_waves(j1, steps)
        plus, minus = u0 * r0 + u1 * r1, u0 * l0 + u1 * l1
    else:
        def probe(kind, index):
            return reader.probe(kind, name, index, steps)

        strain = w0 * probe("eps", i0) + w1 * probe("eps", i1)
        waves = [(0.5 * (probe("eps", j) - probe("v", j) / c), 0.5 * (probe("eps", j - 1) + probe("v", j) / c))
                 for j in (j0, j1)]
        plus, minus = u0 * waves[0][0] + u1 * waves[1][0], u0 * waves[0][1] + u1 * waves[1][1]
    return -strain, -plus, -minus


def _all_stations(spec):
    """(bar, distance from its specimen face [m], measured from the bar's far end) of every gauge station."""
    out = [("incident", spec.incident_gauge_distance, True)]
    if spec.transmitted is not None:
        out.append(("transmitted", spec.transmitted_gauge_distance, False))
    out += [("incident", d, True) for d in spec.incident_stations]
    out += [("transmitted", d, False) for d in spec.transmitted_stations]
    return out


def _station_records(spec, by_name, lines, reader, kept_steps):
    """The further stations' strain and travelling waves [1] at the kept steps, compression positive.

    Returns ``{name: (bar, distance, strain, toward_specimen, away_from_specimen)}``; on the transmitted bar the
    wave travelling +x is the one going away from the specimen.
    """
    out = {}
    for bar_name, distances, from_end in (("incident", spec.incident_stations, True),
                                          ("transmitted", spec.transmitted_stations, False)):
        for k, d in enumerate(distances, start=2):
            strain, plus, minus = _bar_measures(bar_name, by_name[bar_name], lines, reader, d, from_end, kept_steps)
            toward, away = (plus, minus) if from_end else (minus, plus)
            out[station_name(bar_name, k)] = (bar_name, float(d), strain, toward, away)
    return out


def _records(spec, by_name, lines, grid, reader, impulses, work, end_kinetic, faces, left_of, dt, kept_steps,
             energies=True):
    """The kept rows (time, gauges, truth, forces, energies, waves) and the peak strains of the resolved rods.

    ``faces`` holds each delay line's end node velocities, v(-1/2) first; without ``energies`` the delay lines'
    energies are left out (NaN).
    """
    ks = kept_steps
    rec = np.full((ks.size, 15), np.nan)
    rec[:, 0] = ks * dt
    strain, plus, minus = _bar_measures("incident", by_name["incident"], lines, reader,
                                        spec.incident_gauge_distance, True, ks)
    rec[:, 1], rec[:, 11], rec[:, 12] = strain, plus, minus
    if "transmitted" in by_name:
        strain, plus, minus = _bar_measures("transmitted", by_name["transmitted"], lines, reader,
                                            spec.transmitted_gauge_distance, False, ks)
        rec[:, 2], rec[:, 13], rec[:, 14] = strain, plus, minus  # away from the specimen is +x
        i_front = left_of.get("specimen", left_of["transmitted"])
        rec[:, 6] = impulses[i_front, ks] / dt
        rec[:, 7] = impulses[left_of["transmitted"], ks] / dt
    specimen = by_name.get("specimen")
    peak = {name: (max(0.0, float(np.max(-reader.mean_strain[name][ks]))),
                   max(0.0, float(np.max(-reader.min_strain[name][ks])))) for name in reader.resolved}
    for name in ("specimen", "shaper"):
        if name in lines:  # elastic at Courant 1
            mean, low = lines[name].strain_mean_and_min(ks)
            peak[name] = (max(0.0, float(np.max(-mean))), max(0.0, float(np.max(-low))))
            if name == "specimen":
                rec[:, 3] = -specimen.spec.modulus * mean
                rec[:, 4] = -mean
    if specimen is not None:
        if "specimen" in lines:  # end node velocities v(n-1/2) and v(n+1/2) from the kept history
            front, back = faces["specimen"]
            v_front_before, v_front, v_back_before, v_back = front[ks], front[ks + 1], back[ks], back[ks + 1]
        else:
            rec[:, 3] = -reader.mean_force["specimen"][ks] / specimen.spec.area
            rec[:, 4] = -reader.mean_strain["specimen"][ks]
            n_el = grid.links["specimen"].stop - grid.links["specimen"].start
            v_front, v_back = (reader.probe("v", "specimen", j, ks) for j in (0, n_el))
            v_front_before, v_back_before = (np.where(ks > 0, reader.probe("v", "specimen", j, np.maximum(ks - 1, 0)),
                                                      0.0) for j in (0, n_el))
        # velocities at n: mean of the half steps on either side (the specimen starts at rest)
        rec[:, 5] = (0.5 * (v_front_before + v_front) - 0.5 * (v_back_before + v_back)) / specimen.spec.length
    kinetic, strain_energy = reader.kinetic + end_kinetic, reader.strain_energy.copy()
    if not energies:
        kinetic[:] = strain_energy[:] = np.nan
    rec[:, 8], rec[:, 9], rec[:, 10] = kinetic[ks], strain_energy[ks], work[ks]

    def line_energies():
        """Columns 8 and 9 with the delay lines' kinetic and strain energies [J] added (done on first use of
        :attr:`VirtualShotResult.energy_columns`: a virtual record does not need them)."""
        k_all, s_all = kinetic.copy(), strain_energy.copy()
        for line in lines.values():
            k_line, s_line = line.energies(k_all.size - 1)
            k_all += k_line
            s_all += s_line
        return k_all[ks], s_all[ks]

    return rec, peak, (line_energies if energies and lines else None)


def _extrapolate(x1, x2=None, x3=None):
    """The next plastic increment from the last one, two or three (latest first), all > 0: quadratic in
    ``ln x`` (exact for the exponential growth of the increments where a rate term ``C ln(rate)`` holds the
    flow stress, as good as quadratic in ``x`` for smooth flow, and positive)."""
    if x2 is None:
        return x1
    ratio = x1 / x2
    if x3 is None:
        return x1 * ratio
    out = ratio * ratio  # x1 ratio**3 (x3 / x1)
    out *= ratio
    out *= x3
    return out


class _PlasticState:
    """Plastic strain and dissipated work of one rod with a constitutive law.

    ``eps`` and ``F`` are views of the grid's strains and forces of the rod's
    elements. The step is :func:`radial_return`'s (the same equations and
    convergence tests, :func:`_solve_increment`), arranged to ask the law as
    seldom as possible:

    * the quasi-static flow stress of each element is kept between steps (it
      changes only when the element's plastic strain does), so an elastic
      step does not ask the law at all;
    * an element that flowed in the last step starts from its increment
      extrapolated from its last three (:func:`_extrapolate`), or from the
      rate-independent estimate if the law's slope was zero (perfect
      plasticity, where that estimate is exact), and one Newton step is
      taken from there with one call of the law (:meth:`_newton_from`); it
      stands if it changes the increment by at most ``1e-5`` of itself (the
      second convergence test of :func:`_solve_increment`), which it
      usually does; if not, further steps are taken, up to
      ``_EXTRA_NEWTON``, while where they lead lies inside the bracket
      ``(0, |s_trial| / E)`` (each costs one call of the law; one round of
      the general iteration, which tries two starting points and keeps a
      bracket, costs several times more). Otherwise, and where an element starts to flow, the general
      iteration takes over from where the steps led.
    """

    def __init__(self, rod: _Rod, eps, F):
        m = rod.n
        self.rod = rod
        self.eps, self.F = eps, F
        self.E = rod.spec.modulus
        self.A = rod.spec.area
        self.inverse_area = 1.0 / self.A
        self.eps_p = np.zeros(m)  # signed plastic strain
        self.p = np.zeros(m)  # accumulated equivalent plastic strain
        self.work = 0.0  # plastic work [J]
        self.increments = [np.zeros(m) for _ in range(3)]  # the last three steps' increments, latest first
        self.age = np.zeros(m, dtype=np.int64)  # steps in a row each element has flowed
        self.flat = False  # the law's slope was zero in the last Newton step (perfect plasticity)
        self.flow = rod.law.flow_stress
        self.quasi_static = np.array(self.flow(self.p, np.zeros(m)), dtype=float)  # flow_stress(p, 0)
        self._set_quasi_static_min()
        self.vol = rod.spec.area * rod.dx
        self.trial, self.size, self.over = np.zeros(m), np.zeros(m), np.zeros(m, dtype=bool)
        self.aged = False  # some element flowed in the last step
        self.run = 0  # steps in a row in which every element flowed
        self.work_buffer = np.zeros(m)
        self.points, self.rates = np.empty((4, m)), np.empty((4, m))  # the law's arguments (_newton_from)
        self.law_args = self.points.reshape(-1), self.rates.reshape(-1)  # (views)
        self.h = np.empty(m)

    def update(self, dt):
        trial, size, over, E = self.trial, self.size, self.over, self.E
        np.subtract(self.eps, self.eps_p, out=trial)  # the elastic strain, for now
        # elastic step, surely, if every |E trial| <= the smallest quasi-static flow stress: first by the sum of
        # squares (one call), then element by element
        if np.dot(trial, trial) > self.elastic_squared:
            np.abs(trial, out=size)
            if _max(size) * E > self.quasi_static_min:
                trial *= E
                size *= E
                return self._check_flow(trial, size, over, E, dt)
        self._elastic(trial)
        return False

    def flow_step(self, dt):
        """:meth:`update` for a step the caller has found may flow (a force beyond the smallest flow stress),
        with ``F`` holding the trial forces ``EA (eps - eps_p)``."""
        trial, size = self.trial, self.size
        np.multiply(self.F, self.inverse_area, out=trial)  # the trial stress
        np.abs(trial, out=size)
        return self._check_flow(trial, size, self.over, self.E, dt)

    def _check_flow(self, trial, size, over, E, dt):
        """The step of an element that may flow: the trial stress ``trial`` [Pa] (``size`` its magnitude)
        against each element's flow stress, then the return mapping of those that flow."""
        np.greater(size, self.quasi_static, out=over)
        every = _all(over)
        if not every and not _any(over):
            self._elastic(trial, E)
            return False
        if every:  # the common case while the rod flows: no gathering
            flowing, size_f, p_f, quasi_static_f, age = slice(None), size, self.p, self.quasi_static, self.age
            x1, x2, x3 = self.increments
        else:
            flowing = np.flatnonzero(over)
            size_f, p_f, quasi_static_f, age = size[flowing], self.p[flowing], self.quasi_static[flowing], \
                self.age[flowing]
            x1, x2, x3 = (x[flowing] for x in self.increments)
        guess = inc = None
        if self.flat:  # the rate-independent estimate is exact
            guess = (size_f - quasi_static_f) / E
        elif self.run >= 3 or (not every and _min(age) >= 3):
            guess = _extrapolate(x1, x2, x3)
        elif _max(age) >= 1:
            with np.errstate(divide="ignore", invalid="ignore"):
                guess = np.where(age >= 3, _extrapolate(x1, x2, x3), np.where(age == 2, _extrapolate(x1, x2), x1))
            if _min(age) == 0:
                guess = None
        if guess is not None:
            inc, quasi_static, guess = self._newton_from(guess, size_f, p_f, dt)
            for _ in range(_EXTRA_NEWTON):  # further steps while they stay inside the bracket
                if inc is not None or not (_all(guess > 0.0) and _all(guess * E < size_f)):
                    break
                inc, quasi_static, guess = self._newton_from(guess, size_f, p_f, dt)
        if inc is None:  # the general iteration, from where the step led or from the last increments
            if guess is None:
                with np.errstate(divide="ignore", invalid="ignore"):
                    guess = np.where(x2 > 0.0, np.where(x3 > 0.0, _extrapolate(x1, x2, x3), _extrapolate(x1, x2)), x1)
            inc, quasi_static = _solve_increment(size_f, p_f, E, self.flow, dt, guess, 1e-10, 60, quasi_static_f)
        if not every or self.run < 3:  # (after three steps of flow everywhere, every age is >= 3: all the
            self.age += 1  # tests above ask of it)
        if every:
            self.quasi_static = quasi_static
            self.run += 1
        else:
            self.quasi_static[flowing] = quasi_static
            self.age[~over] = 0
            self.run = 0
            inc_f, inc = inc, np.zeros(self.rod.n)
            inc[flowing] = inc_f
        self.aged = True
        self.increments = [inc] + self.increments[:2]
        returned = self.work_buffer
        np.multiply(inc, E, out=returned)
        np.subtract(size, returned, out=returned)  # |returned stress|
        # dissipated work: stress at the end of the step times plastic increment (first order)
        self.work += float(returned @ inc) * self.vol
        self.eps_p += np.copysign(inc, trial)
        self.p += inc
        self._set_quasi_static_min()
        np.copysign(returned, trial, out=returned)
        np.multiply(returned, self.A, out=self.F)
        return True

    def _set_quasi_static_min(self):
        """The smallest quasi-static flow stress [Pa], and the bounds on the sums of squared elastic strains
        [1] and of squared forces [N^2] below which no element can flow."""
        self.quasi_static_min = _min(self.quasi_static)
        positive = self.quasi_static_min > 0.0
        self.elastic_squared = (self.quasi_static_min / self.E) ** 2 if positive else -1.0
        self.force_squared = (self.quasi_static_min * self.A) ** 2 if positive else -1.0
        self.force_limit = self.quasi_static_min * self.A

    def settle(self):
        """An elastic step after plastic flow: the increments' history restarts."""
        self.increments = [np.zeros(self.rod.n)] + self.increments[:2]
        self.age[:] = 0
        self.aged, self.run = False, 0

    def _elastic(self, trial, scale=1.0):
        """An elastic step: the forces from the trial (strain, or stress with ``scale = E``)."""
        if self.aged:
            self.settle()
        np.multiply(trial, self.E * self.A / scale, out=self.F)

    def _newton_from(self, x, size, p, dt):
        """One Newton step from ``x`` for the flowing elements (``size``, ``p`` theirs): ``(increments,
        quasi-static flow stresses, None)`` if it converged (the step test of :func:`_solve_increment`),
        else ``(None, None, where it led)``."""
        m = x.size
        if m == self.rod.n:
            points, rates, h = self.points, self.rates, self.h
            strains, strain_rates = self.law_args
        else:
            points, rates, h = np.empty((4, m)), np.empty((4, m)), np.empty(m)  # as in _flow_points
            strains, strain_rates = points.reshape(-1), rates.reshape(-1)
        # the law's arguments in two calls each: rows x and x + h, at the plastic rate, then at zero rate
        np.multiply(_STEP_FACTORS, x, out=points)
        points += p
        np.multiply(_RATE_FACTORS / dt, x, out=rates)
        np.multiply(x, 1e-6, out=h)
        flow = np.asarray(self.flow(strains, strain_rates), dtype=float).reshape(4, -1)
        f0 = flow[0]
        law_slope = flow[1] - f0
        law_slope /= h
        E = self.E
        g = x * -E
        g += size
        g -= f0
        slope = law_slope + E
        # (floating-point warnings are off here: _run marches under np.errstate)
        lowest = _min(law_slope)
        if lowest > E:  # Newton on ln x (see _solve_increment): dx / x = expm1(dg / g')
            self.flat = False
            change = slope * x
            np.divide(g, change, out=change)
            np.expm1(change, out=change)
            dx = x * change
            converged = _max(np.abs(change, out=g)) <= 1e-5  # (g: no longer needed)
        else:
            dx = g / slope
            highest = _max(law_slope)
            self.flat = lowest == 0.0 and highest == 0.0
            if highest > E:
                dx = np.where(law_slope > E, x * np.expm1(g / (slope * x)), dx)
            converged = _max(np.abs(dx) / x) <= 1e-5
        if not converged:
            return None, None, x + dx
        quasi_static = flow[3] - flow[2]
        quasi_static *= dx / h
        quasi_static += flow[2]
        return x + dx, quasi_static, None


def _directional_weights(rod, distance, from_end):
    """Two interior nodes around a station ``distance`` [m] from the specimen face, their weights, c0.

    The split of the bar strain into its two travelling waves is exact at a
    node of a Courant-1 bar (see :meth:`_DelayLine.node_waves`); between the two
    nodes it is interpolated linearly, like the gauge strain.
    """
    # interior nodes only: both neighbour elements exist
    x = min(max(_station_position(rod, distance, from_end) / rod.dx, 1.0), rod.n - 1.0)
    j = min(int(math.floor(x)), rod.n - 2)
    w = x - j
    return rod.node0 + j, rod.node0 + j + 1, 1.0 - w, w, rod.spec.wave_speed


def _station_position(rod, distance, from_end):
    """Position [m] from the rod's first node of a station ``distance`` [m] from its specimen-side face.

    Faces of capped ends lie half an element beyond the end node.
    """
    if from_end:
        return (rod.n + 0.5 * rod.cap_end) * rod.dx - distance
    return distance - 0.5 * rod.cap_start * rod.dx


def _gauge_weights(rod, distance, from_end):
    """Two element indices and linear weights for a station ``distance`` [m] from the specimen face."""
    # element i has its centre at (i + 1/2) dx from the rod's first node
    x = min(max(_station_position(rod, distance, from_end) / rod.dx - 0.5, 0.0), rod.n - 1.0)
    i = min(int(math.floor(x)), rod.n - 2) if rod.n > 1 else 0
    w = x - i
    j = min(i + 1, rod.n - 1)
    return rod.node0 + i, rod.node0 + j, 1.0 - w, w


def _assemble(spec, rods, dt, t_samples, rec, impact_force, e0, peak, stations=None, line_energies=None):
    by_name = {r.name: r for r in rods}
    inc = by_name["incident"]
    n_enter = int(np.argmax(impact_force > spec.foot_fraction * impact_force.max()))
    # the foot crosses one incident-bar element per step (Courant 1), face to face
    foot = n_enter * dt + inc.length / inc.spec.wave_speed
    # linear interpolation in time onto the recorder clock; at Courant 1 a bar element's strain is the
    # element average, which varies linearly in time while a front crosses it, so this adds no error there
    time = t_samples
    kept, kept_time = rec, rec[:, 0]
    # (the energies, columns 8 to 10, on first use: energy_source below)
    rec = np.full((time.size, kept.shape[1]), np.nan)
    rec[:, 0] = time
    for k in (*range(1, 8), *range(11, kept.shape[1])):
        rec[:, k] = np.interp(time, kept_time, kept[:, k])
    t_us = (time - foot) * 1e6
    truth = dict(zip(TRUTH_COLUMNS, (t_us, rec[:, 3] * 1e-6, rec[:, 4], rec[:, 5], rec[:, 6] * 1e-3,
                                     rec[:, 7] * 1e-3)))
    kept_energies = kept[:, 8:11]

    def energies():
        """The energy columns, the delay lines' part added now (see :func:`_records`)."""
        columns = kept_energies.copy()
        if line_energies is not None:
            columns[:, 0], columns[:, 1] = line_energies()
        kinetic, strain, plastic = (np.interp(time, kept_time, columns[:, k]) for k in range(3))
        return {"time_us": t_us, "kinetic_J": kinetic, "strain_J": strain, "plastic_J": plastic,
                "total_J": kinetic + strain + plastic}

    grid = {
        "dt_s": dt,
        "steps": len(impact_force),
        "steps_per_sample": spec.sample_rate ** -1 / dt,
        "nodes": rods[-1].last_node + 1,
        "initial_kinetic_J": e0,
        "rods": {
            r.name: {
                "elements": r.n,
                "element_length_m": r.dx,
                "length_m": r.length,
                "courant": r.spec.wave_speed * dt / r.dx,
                **({"peak_strain": peak[r.name][0], "peak_element_strain": peak[r.name][1]} if r.name in peak else {}),
            }
            for r in rods
        },
    }
    gauge_waves = {name: rec[:, k].copy() for k, name in enumerate(
        ("incident_toward_specimen", "incident_away_from_specimen",
         "transmitted_away_from_specimen", "transmitted_toward_specimen"), start=11)}
    station_out = {name: {"bar": bar, "distance_m": d, **{key: np.interp(time, kept_time, x) for key, x in
                                                          (("strain", strain), ("toward_specimen", toward),
                                                           ("away_from_specimen", away))}}
                   for name, (bar, d, strain, toward, away) in (stations or {}).items()}
    return VirtualShotResult(time=time, strain_incident_gauge=rec[:, 1].copy(),
                             strain_transmitted_gauge=rec[:, 2].copy(), foot_arrival_time=foot,
                             truth_columns=truth, energy_source=energies, grid=grid, spec=spec, gauge_waves=gauge_waves,
                             stations=station_out)


# =========================================================================== from the model to a record
#: Where the recorder's clock starts: the incident foot at the incident gauge, or the impact.
TRIGGERS = ("incident-gauge", "impact")


@dataclass(frozen=True)
class RecorderSpec:
    """How the virtual recorder digitises the gauge channels (SI units).

    Attributes
    ----------
    sample_rate : float
        Sample rate [Hz].
    duration : float
        Record length [s].
    pre_trigger : float
        Record kept before the trigger [s] (>= 0).
    trigger : str
        ``incident-gauge``: t = 0 of the record when the incident foot
        reaches the incident gauge (what a scope triggered on the incident
        channel shows; rounded to a whole sample); ``impact``: t = 0 at impact.
    bits : int or None
        Resolution of the converter [bit]; None: no quantisation.
    full_scale : tuple of (float or None)
        Input range of each channel (incident, transmitted): +/- this many
        volts [V]; samples beyond the rails are clipped. None: no rails.
    noise_volts : tuple of float
        Standard deviation of white noise added to each channel [V].
    noise_strain : tuple of float
        Standard deviation of white noise in strain units [1], turned into
        volts through each gauge's bridge (added in quadrature to ``noise_volts``).
    offset : tuple of float
        Baseline offset of each channel [V].
    seed : int or None
        Seed of the noise generator (numpy ``default_rng``).
    """

    sample_rate: float = 10e6
    duration: float = 0.8e-3
    pre_trigger: float = 100e-6
    trigger: str = "incident-gauge"
    bits: Optional[int] = 12
    full_scale: tuple = (5.0, 5.0)
    noise_volts: tuple = (0.0, 0.0)
    noise_strain: tuple = (0.0, 0.0)
    offset: tuple = (0.0, 0.0)
    seed: Optional[int] = None


@dataclass
class VirtualRecord:
    """A digitised virtual record.

    Attributes
    ----------
    time : ndarray
        Record time [s] (t = 0 at the trigger).
    volts_incident, volts_transmitted : ndarray
        Recorded channels [V] (transmitted None in a free-end shot).
    strain_incident, strain_transmitted : ndarray
        The bar strains at the gauges that the channels carry, before noise,
        offset and quantisation [1], compression positive.
    trigger_time : float
        Time after impact of the record's t = 0 [s].
    volts_stations, strain_stations : dict
        The further stations recorded (``incident_2``, ...): their channels
        [V] and the bar strains they carry [1] (empty when none).
    info : dict
        ``quantisation_step_V``, ``noise_std_V``, ``offset_V``,
        ``clipped_samples`` (per channel), ``dispersion`` (None or the plane
        at which the model's waves are taken as undispersed), ``trigger_time_s``.
    """

    time: np.ndarray
    volts_incident: np.ndarray
    volts_transmitted: Optional[np.ndarray]
    strain_incident: np.ndarray
    strain_transmitted: Optional[np.ndarray]
    trigger_time: float
    info: dict = field(default_factory=dict)
    volts_stations: dict = field(default_factory=dict)
    strain_stations: dict = field(default_factory=dict)


def trigger_time(spec: VirtualShotSpec, recorder: RecorderSpec) -> float:
    """Time after impact of the record's t = 0 [s], on the sample grid.

    For ``trigger = "incident-gauge"`` it is the transit of the incident foot
    from the impact face to the gauge, ``(L_i - d_i) / c0`` (Kolsky 1949),
    plus the elastic transit of the pulse shaper if there is one, rounded to
    a whole sample as a scope's trigger is.
    """
    if recorder.trigger not in TRIGGERS:
        raise InputError(f"expected one of {', '.join(TRIGGERS)}, got {recorder.trigger!r}", "RecorderSpec.trigger")
    t = 0.0 if spec.incident_pulse is None else spec.incident_pulse.impact_time
    if recorder.trigger == "incident-gauge":
        t += (spec.incident.length - spec.incident_gauge_distance) / spec.incident.wave_speed
        if spec.shaper is not None:
            t += spec.shaper.length / spec.shaper.wave_speed
    return round(t * recorder.sample_rate) / recorder.sample_rate


def model_duration(trigger: float, recorder: RecorderSpec) -> float:
    """How long after impact the model must run for a record starting ``pre_trigger`` before ``trigger`` [s]."""
    fs = recorder.sample_rate
    n = int(round(recorder.duration * fs))
    last = n - 1 - int(round(recorder.pre_trigger * fs)) + int(round(trigger * fs))
    if last < 1:
        raise InputError("the record ends before the impact: lengthen duration or shorten pre_trigger",
                         "RecorderSpec.duration")
    return last / fs


def incident_bar_stress(striker_speed, striker: RodSpec, bar: RodSpec) -> float:
    """Peak stress of the incident pulse [Pa], compression positive, for a striker hitting a bar.

    ``sigma = rho_b c_b v Z_s / (Z_s + Z_b)`` with ``Z = rho c0 A``; for a
    striker of the bar's material and diameter ``sigma = rho c0 v / 2``. A
    pulse shaper lowers or delays the peak, never raises it; at the specimen
    face the bar stress may reach up to twice this if the specimen does not
    yield (a stiff specimen reflects the pulse in compression).

    Parameters
    ----------
    striker_speed : float
        Impact speed v [m/s].
    striker, bar : RodSpec
        The striker and the incident bar.

    References
    ----------
    .. [1] H. Kolsky, Stress Waves in Solids, Clarendon Press, 1953 (Dover 1963),
       ch. 3 (impact of bars).
    .. [2] K. F. Graff, Wave Motion in Elastic Solids, 1975, ch. 2 (impact of rods).
    """
    zs, zb = striker.impedance, bar.impedance
    return bar.density * bar.wave_speed * float(striker_speed) * zs / (zs + zb)


def plan_shot(spec: VirtualShotSpec, bar_yield_strength=None, striker_yield_strength=None) -> dict:
    """Planning numbers for a shot: striker speed and energy, pulse length, incident bar stress against yield.

    Parameters
    ----------
    spec : VirtualShotSpec
    bar_yield_strength, striker_yield_strength : float or None
        Yield strengths of the incident bar and the striker [Pa].

    Returns
    -------
    dict
        ``striker_speed_m_per_s``, ``striker_length_m``, ``striker_kinetic_energy_J``,
        ``pulse_duration_us`` (2 L / c0 of the striker), ``incident_bar_stress_MPa``
        (:func:`incident_bar_stress`), ``matched_striker_stress_MPa``
        (rho c0 v / 2 of the bar), ``yield_strength_MPa`` (the lower of the
        two given, or None), ``fraction_of_yield`` and ``yields`` (bar stress
        at or above it).
    """
    s, b, v = spec.striker, spec.incident, float(spec.striker_speed)
    sigma = incident_bar_stress(v, s, b)
    limits = [y for y in (bar_yield_strength, striker_yield_strength) if y]
    limit = min(limits) if limits else None
    return {
        "striker_speed_m_per_s": v,
        "striker_length_m": s.length,
        "striker_kinetic_energy_J": 0.5 * s.density * s.area * s.length * v * v,
        "pulse_duration_us": 2.0 * s.length / s.wave_speed * 1e6,
        "incident_bar_stress_MPa": sigma / 1e6,
        "matched_striker_stress_MPa": 0.5 * b.density * b.wave_speed * v / 1e6,
        "yield_strength_MPa": None if limit is None else limit / 1e6,
        "fraction_of_yield": None if limit is None else sigma / limit,
        "yields": bool(limit is not None and sigma >= limit),
    }


def check_plan(plan: dict, allow_bar_yield: bool = False, where: str = "striker.speed") -> None:
    """Refuse a plan whose incident bar stress reaches the yield strength (InputError) unless allowed."""
    if plan["yields"] and not allow_bar_yield:
        raise InputError(
            f"a striker speed of {plan['striker_speed_m_per_s']:.3g} m/s gives a peak incident bar stress of "
            f"{plan['incident_bar_stress_MPa']:.0f} MPa, at or above the yield strength "
            f"({plan['yield_strength_MPa']:.0f} MPa): lower the speed (or pass --allow-bar-yield to simulate it "
            f"anyway)",
            where)


def digitise(volts, bits=None, full_scale=None):
    """Quantise a channel to a converter's codes and clip it at the rails.

    A ``bits``-bit converter over +/- ``full_scale`` has codes
    ``-2**(bits-1) .. 2**(bits-1) - 1`` of width ``2 full_scale / 2**bits``;
    each sample becomes the nearest code (values beyond the rails take the
    end codes).

    Parameters
    ----------
    volts : array_like
        Channel [V].
    bits : int or None
        Converter resolution [bit]; None: no quantisation (only clipping).
    full_scale : float or None
        Input range +/- [V]; None: no rails (then ``bits`` must be None).

    Returns
    -------
    ndarray
        The recorded channel [V].
    """
    v = np.asarray(volts, dtype=float)
    if full_scale is None:
        if bits is not None:
            raise InputError("quantisation needs the recorder's range", "RecorderSpec.full_scale")
        return v.copy()
    if bits is None:
        return np.clip(v, -full_scale, full_scale)
    step = 2.0 * full_scale / 2**int(bits)
    half = 2 ** (int(bits) - 1)
    return np.clip(np.round(v / step), -half, half - 1) * step


def _fourier_delay(x, dt, delay):
    """Delay a sampled signal by ``delay`` [s] (any fraction of a sample) by the Fourier shift theorem.

    The record is extended as in :func:`shpb.dispersion.propagate` (last
    value held, raised-cosine bridge, first value held) so that nothing wraps
    round and the periodic signal has no jump.
    """
    from .dispersion import _fast_length  # numpy's FFT: no scipy import for a virtual shot

    x = np.asarray(x, dtype=float)
    n = x.size
    hold = int(math.ceil(abs(delay) / dt)) + 32
    bridge = 32
    total = _fast_length(n + 2 * hold + bridge)
    bridge = total - n - 2 * hold
    y = np.empty(total)
    y[:n] = x
    y[n:n + hold] = x[-1]
    w = 0.5 - 0.5 * np.cos(np.pi * np.arange(1, bridge + 1) / (bridge + 1))
    y[n + hold:n + hold + bridge] = x[-1] + (x[0] - x[-1]) * w
    y[n + hold + bridge:] = x[0]
    spectrum = np.fft.rfft(y)
    spectrum *= np.exp(-2j * np.pi * np.fft.rfftfreq(total, dt) * delay)
    return np.fft.irfft(spectrum, total)[:n]


def excess_dispersion(strain, dt, distance, bar_radius, bar_wave_speed, poisson_ratio):
    """Pochhammer–Chree dispersion over a distance, without the bulk delay ``distance / c0``.

    ``propagate`` (Follansbee & Frantz 1983) delays each harmonic by
    ``distance / c(f)``; this returns that, advanced again by
    ``distance / c0``, so a wave keeps its place on the time axis and only
    its shape changes: each harmonic is delayed by
    ``distance (1/c(f) - 1/c0)``. A negative distance undoes a positive one.

    Parameters
    ----------
    strain : array_like
        Strain history [1], uniformly sampled.
    dt : float
        Sample interval [s].
    distance : float
        Signed path length [m].
    bar_radius : float
        Bar radius a [m].
    bar_wave_speed : float
        Bar wave speed c0 [m/s].
    poisson_ratio : float
        Poisson ratio of the bar [1].

    Returns
    -------
    ndarray
        Dispersed strain [1] on the same time axis.

    References
    ----------
    .. [1] P. S. Follansbee, C. Frantz, J. Eng. Mater. Technol. 105 (1983) 61-66,
       doi:10.1115/1.3225620.
    .. [2] D. Bancroft, Phys. Rev. 59 (1941) 588-593, doi:10.1103/PhysRev.59.588.
    """
    from . import dispersion

    x = np.asarray(strain, dtype=float)
    if distance == 0.0:
        return x.copy()
    # held edges: propagate drops what it moves out of its window, and the advance by d / c0 below
    # brings back what lay up to |d| / c0 beyond an end; 2 |d| / c0 leaves a margin
    pad = int(math.ceil(2.0 * abs(distance) / bar_wave_speed / dt)) + 64
    padded = np.concatenate([np.full(pad, x[0]), x, np.full(pad, x[-1])])
    moved = dispersion.propagate(padded, dt, distance, bar_radius, bar_wave_speed, poisson_ratio)
    return _fourier_delay(moved, dt, -distance / bar_wave_speed)[pad:pad + x.size]


#: Directional waves at the gauges: (name, bar, first-pass path from the impact face as a function of
#: (incident length, transmitted length, incident gauge distance, transmitted gauge distance)).
_WAVE_PATHS = (
    ("incident_toward_specimen", "incident", lambda li, lt, di, dt_: li - di),
    ("incident_away_from_specimen", "incident", lambda li, lt, di, dt_: li + di),
    ("transmitted_away_from_specimen", "transmitted", lambda li, lt, di, dt_: li + dt_),
    ("transmitted_toward_specimen", "transmitted", lambda li, lt, di, dt_: li + 2 * lt - dt_),
)


def dispersed_gauge_strains(result: VirtualShotResult, *, incident_poisson_ratio, transmitted_poisson_ratio=None,
                            undispersed_at="specimen"):
    """Gauge strains of a virtual shot with Pochhammer–Chree dispersion added over each wave's path.

    The model's bars are non-dispersive. This takes the two waves crossing
    each gauge (``result.gauge_waves``, an exact split of the model's bar
    strain), cuts each into its successive passes (the pulse, then its echo
    from the bar's far end, ...), and adds to each pass the dispersion it
    would have gathered over its path from a reference plane at which the
    model's waves are taken as the truth (:func:`excess_dispersion`):

    ``undispersed_at="specimen"`` (a specimen shot): the waves at the
    specimen faces are the model's (what the specimen received and gave, so
    the model's specimen truth belongs to them). The reflected and
    transmitted waves then disperse forward over the gauge distances
    (+d_i, +d_t) as in a real bar; the incident wave is carried backwards
    (-d_i) from the face to its gauge, so its dispersion shows as a precursor
    before the rise rather than as a trailing ripple. A perfect correction
    therefore recovers the model's face waves exactly.

    ``undispersed_at="impact"`` (calibration shots without a specimen): the
    pulse leaves the impact face undispersed and every pass disperses over
    its whole path from there, as in a real bar (exact for linear elastic
    bars of one material and diameter).

    Parameters
    ----------
    result : VirtualShotResult
    incident_poisson_ratio, transmitted_poisson_ratio : float
        Poisson ratios of the bars [1].
    undispersed_at : {"specimen", "impact"}

    Returns
    -------
    incident, transmitted : ndarray
        Bar strains at the gauges [1], compression positive, on
        ``result.time`` (transmitted NaN in a free-end shot).

    Notes
    -----
    The k-th pass of a wave reaches its gauge at ``t_face + (p_k - L_i) / c``
    with ``p_k = p_1 + 2 (k - 1) L`` its path from the impact face. A pass is
    the part of the wave from one tenth of the bar's round-trip time before
    its arrival to the same before the next pass (raised-cosine hand-over,
    the windows summing to one), so the round trip must exceed the pulse
    length by that margin. The transit through the specimen and waves that
    cross the specimen or an open contact more than once are given the path
    of the bar they are in only; beyond the first passes the dispersion is
    therefore approximate (later passes are not used by a reduction).

    References
    ----------
    .. [1] P. S. Follansbee, C. Frantz, J. Eng. Mater. Technol. 105 (1983) 61-66,
       doi:10.1115/1.3225620.
    .. [2] K. F. Graff, Wave Motion in Elastic Solids, 1975, ch. 2 and §8.2.
    """
    bars, li, lt = _dispersion_bars(result, incident_poisson_ratio, transmitted_poisson_ratio, undispersed_at)
    spec = result.spec
    out = {"incident": np.zeros_like(result.time),
           "transmitted": np.zeros_like(result.time) if "transmitted" in bars else None}
    for name, bar_name, first in _WAVE_PATHS:
        if bar_name in bars:
            p1 = first(li, lt, spec.incident_gauge_distance, spec.transmitted_gauge_distance)
            out[bar_name] += _dispersed_passes(result, result.gauge_waves[name], bar_name, p1, bars, undispersed_at)
    if out["transmitted"] is None:
        out["transmitted"] = np.full_like(result.time, np.nan)
    return out["incident"], out["transmitted"]


def dispersed_station_strains(result: VirtualShotResult, *, incident_poisson_ratio, transmitted_poisson_ratio=None,
                              undispersed_at="specimen") -> dict:
    """The further gauge stations' strains (``result.stations``) with Pochhammer–Chree dispersion added.

    As :func:`dispersed_gauge_strains` does for the two main gauges: each of
    the two waves crossing a station is cut into its passes and given the
    dispersion of its path from the reference plane.

    Returns
    -------
    dict
        Station name (``incident_2``, ...) -> bar strain [1], compression
        positive, on ``result.time``.
    """
    bars, li, lt = _dispersion_bars(result, incident_poisson_ratio, transmitted_poisson_ratio, undispersed_at)
    out = {}
    for name, station in result.stations.items():
        bar_name, d = station["bar"], station["distance_m"]
        # first-pass paths from the impact face, as in _WAVE_PATHS with the station's distance
        toward_path, away_path = (li - d, li + d) if bar_name == "incident" else (li + 2 * lt - d, li + d)
        out[name] = (_dispersed_passes(result, station["toward_specimen"], bar_name, toward_path, bars, undispersed_at)
                     + _dispersed_passes(result, station["away_from_specimen"], bar_name, away_path, bars,
                                         undispersed_at))
    return out


def _dispersion_bars(result, incident_poisson_ratio, transmitted_poisson_ratio, undispersed_at):
    """Checks, and ``({bar: (RodSpec, Poisson ratio, modelled length)}, incident length, transmitted length)``."""
    if undispersed_at not in ("specimen", "impact"):
        raise InputError(f"expected 'specimen' or 'impact', got {undispersed_at!r}", "undispersed_at")
    spec, rods = result.spec, result.grid["rods"]
    if spec.specimen is None and undispersed_at == "specimen":
        raise InputError("a shot without a specimen has no specimen faces: use undispersed_at='impact'",
                         "undispersed_at")
    li = rods["incident"]["length_m"]
    lt = rods["transmitted"]["length_m"] if "transmitted" in rods else 0.0
    bars = {"incident": (spec.incident, incident_poisson_ratio, li)}
    if spec.transmitted is not None:
        if transmitted_poisson_ratio is None:
            raise InputError("the transmitted bar's Poisson ratio is needed", "transmitted_poisson_ratio")
        bars["transmitted"] = (spec.transmitted, transmitted_poisson_ratio, lt)
    return bars, li, lt


def _dispersed_passes(result, wave, bar_name, p1, bars, undispersed_at):
    """One travelling wave at a station, cut into its passes, each dispersed over its path from the reference
    plane (``p1`` [m]: the first pass's path from the impact face)."""
    spec = result.spec
    dt, t = 1.0 / spec.sample_rate, result.time
    li = bars["incident"][2]
    rod, _, length = bars[bar_name]
    c = rod.wave_speed
    t_face = result.foot_arrival_time
    margin = 0.1 * 2 * length / c
    arrivals = []
    k = 0
    while True:  # the passes that reach the gauge within the record
        arrival = t_face + (p1 + 2 * k * length - li) / c
        if k > 0 and arrival - 1.5 * margin > t[-1]:
            break
        arrivals.append(arrival)
        k += 1
    out = np.zeros_like(t)
    for k, arrival in enumerate(arrivals):
        weight = _step(t, arrival - 1.5 * margin, margin) if k > 0 else np.ones_like(t)
        if k + 1 < len(arrivals):
            weight = weight - _step(t, arrivals[k + 1] - 1.5 * margin, margin)
        part = wave * weight
        if not np.any(part):
            continue
        path = p1 + 2 * k * length
        for seg_bar, distance in _segments(bar_name, path, li, undispersed_at):
            seg_rod, seg_nu, _ = bars[seg_bar]
            part = excess_dispersion(part, dt, distance, 0.5 * seg_rod.diameter, seg_rod.wave_speed, seg_nu)
        out += part
    return out


def _step(t, start, width):
    """0 before ``start``, raised-cosine rise to 1 over ``width`` [s]."""
    u = np.clip((t - start) / width, 0.0, 1.0)
    return 0.5 - 0.5 * np.cos(np.pi * u)


def _segments(bar_name, path, incident_length, undispersed_at):
    """(bar, signed distance) pieces of a pass's path from the reference plane."""
    if undispersed_at == "specimen":
        return [(bar_name, path - incident_length)]
    if bar_name == "incident":
        return [("incident", path)]
    return [("incident", incident_length), ("transmitted", path - incident_length)]


def _channel_volts(strain, gauge, poisson_ratio):
    from .bridge import bar_volts

    return bar_volts(strain, bridge=gauge.bridge, gauge_factor=gauge.gauge_factor, excitation=gauge.excitation,
                     gain=gauge.gain, polarity=gauge.polarity, scale=gauge.scale, poisson_ratio=poisson_ratio)


def virtual_record(result: VirtualShotResult, recorder: RecorderSpec, incident_gauge, transmitted_gauge=None, *,
                   incident_poisson_ratio, transmitted_poisson_ratio=None, dispersion=None, trigger=None,
                   station_gauges=None) -> VirtualRecord:
    """Turn a virtual shot's gauge strains into a digitised record.

    Steps: (1) the bar strain at each gauge, with Pochhammer–Chree
    dispersion added if asked (:func:`dispersed_gauge_strains`); (2) the
    recorder's time window (``pre_trigger`` before the trigger,
    ``duration`` long; zero strain before the impact); (3) volts through each
    gauge's bridge, gauge factor, excitation, gain, polarity and calibration
    scale (:func:`shpb.bridge.bar_volts`, the exact inverse of the
    reduction's conversion); (4) white noise, baseline offset; (5)
    quantisation and clipping (:func:`digitise`).

    Parameters
    ----------
    result : VirtualShotResult
        Run at the recorder's sample rate, long enough for the record
        (:func:`model_duration`).
    recorder : RecorderSpec
    incident_gauge, transmitted_gauge : shpb.setup.Gauge
        Bridge settings of each channel (transmitted None in a free-end shot).
    incident_poisson_ratio, transmitted_poisson_ratio : float
        Poisson ratios of the bars [1] (bridge transverse gauges, dispersion).
    dispersion : None, "specimen" or "impact"
        None: the model's non-dispersive strains; otherwise the plane at which
        the model's waves are taken as undispersed.
    trigger : float, optional
        Time after impact of the record's t = 0 [s]; default
        :func:`trigger_time`.
    station_gauges : dict, optional
        Station name of ``result.stations`` (``incident_2``, ...) -> its
        :class:`shpb.setup.Gauge` (bridge settings): these stations are
        recorded too, on further channels with the noise, offset and range
        of their bar's main channel (noise drawn after the main channels').

    Returns
    -------
    VirtualRecord
    """
    spec = result.spec
    station_gauges = dict(station_gauges or {})
    missing = sorted(set(station_gauges) - set(result.stations))
    if missing:
        raise InputError(f"no station {', '.join(missing)} in the virtual shot (stations: "
                         f"{', '.join(result.stations) or 'none'})", "station_gauges")
    fs = recorder.sample_rate
    if abs(spec.sample_rate - fs) > 1e-9 * fs:
        raise InputError(f"the model ran at {spec.sample_rate:g} Hz but the recorder samples at {fs:g} Hz",
                         "RecorderSpec.sample_rate")
    if dispersion is None:
        strains = [result.strain_incident_gauge, result.strain_transmitted_gauge]
    else:
        strains = list(dispersed_gauge_strains(result, incident_poisson_ratio=incident_poisson_ratio,
                                               transmitted_poisson_ratio=transmitted_poisson_ratio,
                                               undispersed_at=dispersion))
    if station_gauges:
        at_stations = ({k: v["strain"] for k, v in result.stations.items()} if dispersion is None else
                       dispersed_station_strains(result, incident_poisson_ratio=incident_poisson_ratio,
                                                 transmitted_poisson_ratio=transmitted_poisson_ratio,
                                                 undispersed_at=dispersion))
    trig = trigger_time(spec, recorder) if trigger is None else trigger
    n = int(round(recorder.duration * fs))
    k = np.arange(n) - int(round(recorder.pre_trigger * fs)) + int(round(trig * fs))
    if k[-1] >= result.time.size:
        raise InputError(f"the model ran to {result.time[-1] * 1e6:.1f} us after impact, the record needs "
                         f"{k[-1] / fs * 1e6:.1f} us (see model_duration)", "VirtualShotSpec.duration")
    before = k < 0  # the bars are at rest before the impact
    kk = np.maximum(k, 0)
    rng = np.random.default_rng(recorder.seed)
    nus = {"incident": incident_poisson_ratio, "transmitted": transmitted_poisson_ratio}
    # (channel, gauge, Poisson ratio, recorder channel, strain): the main channels first (their noise draws)
    channels = [("incident", incident_gauge, incident_poisson_ratio, 0, strains[0]),
                ("transmitted", transmitted_gauge, transmitted_poisson_ratio, 1, strains[1])]
    for name, gauge in station_gauges.items():
        bar_name = result.stations[name]["bar"]
        channels.append((name, gauge, nus[bar_name], 0 if bar_name == "incident" else 1, at_stations[name]))
    volts, clean, info = {}, {}, {"noise_std_V": {}, "offset_V": {}, "clipped_samples": {}}
    for name, gauge, nu, i, at_gauge in channels:
        if gauge is None or spec.transmitted is None and name == "transmitted":
            volts[name] = clean[name] = None
            continue
        strain = np.where(before, 0.0, at_gauge[kk])
        v = _channel_volts(strain, gauge, nu)
        slope = abs(float(_channel_volts(1e-6, gauge, nu) - _channel_volts(0.0, gauge, nu))) / 1e-6  # V per strain
        std = math.hypot(recorder.noise_volts[i], recorder.noise_strain[i] * slope)
        v = v + recorder.offset[i] + std * rng.standard_normal(n)
        fsc = recorder.full_scale[i]
        if fsc is not None:
            info["clipped_samples"][name] = int(np.count_nonzero(np.abs(v) >= fsc))
        volts[name] = digitise(v, recorder.bits, fsc)
        clean[name] = strain
        info["noise_std_V"][name] = std
        info["offset_V"][name] = recorder.offset[i]
    info["quantisation_step_V"] = [None if (recorder.bits is None or f is None) else 2 * f / 2**recorder.bits
                                   for f in recorder.full_scale]
    info["dispersion"] = dispersion
    info["trigger_time_s"] = trig
    time = (np.arange(n) - int(round(recorder.pre_trigger * fs))) / fs
    return VirtualRecord(time=time, volts_incident=volts["incident"], volts_transmitted=volts["transmitted"],
                         strain_incident=clean["incident"], strain_transmitted=clean["transmitted"],
                         trigger_time=trig, info=info, volts_stations={k: volts[k] for k in station_gauges},
                         strain_stations={k: clean[k] for k in station_gauges})


def incident_pulse(spec: VirtualShotSpec, *, station=0.01, lead=20e-6) -> IncidentPulse:
    """The pulse a striker (through its shaper) sends into the incident bar, at the impact face, undispersed.

    Runs the striker, shaper and incident bar alone (a free-end shot) at the
    time step the full shot would use, and reads the wave travelling away
    from the impact at a station ``station`` [m] before the far end (the
    exact split of :meth:`_DelayLine.node_waves`), moved back to the impact
    face by its transit ``(L - station) / c0``. Until the echo of the far end
    returns to it (2 L / c0 after the impact) the impact face does not feel
    what lies beyond it, so this is the pulse the full shot receives too.

    Parameters
    ----------
    spec : VirtualShotSpec
        A shot with a striker.
    station : float
        Distance of the reading station from the incident bar's far end [m].
    lead : float
        Zeros kept before the impact [s] (``IncidentPulse.impact_time``),
        rounded up to whole recorder samples.

    Returns
    -------
    IncidentPulse
        Sampled at the full shot's model time step, from ``lead`` before the
        impact until the pulse has died away (below 1e-4 of its peak for 5 us).

    Notes
    -----
    The run stops once the impact face has sent in every wave the reading
    needs (the bar is a delay line: the reading at the station repeats the
    impact face's wave a transit later), about half the steps of the whole
    run, with the same numbers.

    Raises
    ------
    AnalysisError
        The pulse has not ended before the echo of the bar's far end returns.
    """
    if spec.striker is None:
        raise InputError("expected a shot with a striker", "VirtualShotSpec.striker")
    dt = _time_step(spec)
    lead = math.ceil(lead * spec.sample_rate - 1e-9) / spec.sample_rate  # whole samples: the record grid stays
    bar = spec.incident
    transit = (bar.length - station) / bar.wave_speed
    limit = transit + 2 * bar.length / bar.wave_speed - 5e-6  # before the far end's echo comes back round
    estimate = 2 * spec.striker.length / spec.striker.wave_speed
    if spec.shaper is not None:
        estimate += 20 * spec.shaper.length / spec.shaper.wave_speed
    span = 2 * estimate + 30e-6
    base = dataclasses.replace(spec, transmitted=None, specimen=None, incident_gauge_distance=station,
                               incident_stations=(), transmitted_stations=(),
                               sample_rate=1.0 / dt, max_time_step=dt)
    while True:
        duration = min(transit + span, limit)
        run = _shot(dataclasses.replace(base, duration=duration), incident_wave_only=True)
        shift = (run.grid["rods"]["incident"]["length_m"] - station) / bar.wave_speed
        t = np.arange(int(math.floor((run.time[-1] - shift + lead) / dt)) + 1) * dt - lead  # from the impact
        strain = np.interp(t + shift, run.time, run.gauge_waves["incident_toward_specimen"], left=0.0)
        tail = np.abs(strain[t > t[-1] - 5e-6])
        if tail.max() <= 1e-4 * np.abs(strain).max():
            return IncidentPulse(dt=dt, strain=strain, impact_time=lead)
        if duration >= limit:
            raise AnalysisError(f"the incident pulse lasts longer than the incident bar's round trip "
                                f"({2 * bar.length / bar.wave_speed * 1e6:.0f} us): use a longer bar or a shorter "
                                f"striker")
        span *= 2


def dispersed_drive(spec: VirtualShotSpec, incident_poisson_ratio) -> VirtualShotSpec:
    """The shot with its striker and shaper replaced by their pulse, dispersed over the incident bar.

    The striker's pulse (:func:`incident_pulse`) is given the
    Pochhammer–Chree dispersion of the incident bar's length
    (:func:`excess_dispersion`) and drives the bar's impact face: it reaches
    the specimen as it would through a real bar, so the model's specimen
    responds to a physically dispersed incident wave. Every recorded wave
    then gets the dispersion of its path from the specimen faces
    (:func:`dispersed_gauge_strains` with ``undispersed_at="specimen"``),
    which for the incident wave at its gauge amounts to dispersion over the
    impact-face-to-gauge distance, with the ripples trailing as in a real bar.

    Parameters
    ----------
    spec : VirtualShotSpec
        A shot with a striker.
    incident_poisson_ratio : float
        Poisson ratio of the incident bar [1].

    Returns
    -------
    VirtualShotSpec
        With ``striker=None``, ``shaper=None`` and ``incident_pulse`` set;
        the impact happens at ``incident_pulse.impact_time`` (model time), and
        ``duration`` is kept (lengthen it by that much for the same record).

    References
    ----------
    .. [1] P. S. Follansbee, C. Frantz, J. Eng. Mater. Technol. 105 (1983) 61-66,
       doi:10.1115/1.3225620.
    """
    pulse = incident_pulse(spec)
    bar = spec.incident
    # room for the trailing ripples: energy near the slowest group velocity (~0.38 c0 for nu = 0.3) lags
    # by up to ~1.6 L / c0 behind the pulse, so 2 L / c0 of room keeps the whole dispersed tail.
    extra = int(math.ceil(2.0 * bar.length / bar.wave_speed / pulse.dt)) + 64
    strain = np.concatenate([pulse.strain, np.zeros(extra)])
    dispersed = excess_dispersion(strain, pulse.dt, bar.length, 0.5 * bar.diameter, bar.wave_speed, incident_poisson_ratio)
    return dataclasses.replace(spec, striker=None, shaper=None,
                               incident_pulse=IncidentPulse(pulse.dt, dispersed, pulse.impact_time))
