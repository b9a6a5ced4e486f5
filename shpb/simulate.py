"""Virtual shot: one-dimensional wave propagation through a whole pressure-bar rig.

The rig is a chain of 1-D rods in compression-only contact::

    striker -> [pulse shaper] -> incident bar -> [specimen] -> transmitted bar

Each rod has its own modulus, density and cross-section, so impedance changes
at the interfaces follow from force continuity. The specimen and the pulse
shaper may carry a plastic constitutive law. The model returns the bar strains
at two gauge stations (what a recorder would see, before the bridge) and the
specimen's "ground truth" (mean stress, strain, strain rate, face forces) on
the same time base, so a reduction can be checked against known answers.

Numerical scheme
----------------
Explicit staggered grid (leapfrog): velocities at nodes and half steps, strains
and forces in elements at whole steps; lumped (row-sum) nodal masses.

* **Time step.** One common step ``dt`` for the whole chain. It is set by the
  finest resolved part: the specimen (at least 20 elements) and the shaper
  must satisfy Courant ``c dt / dx <= 1``, and ``dt`` must divide the recorder
  sample interval so samples need no interpolation in time.
* **Bars at Courant number exactly 1.** Every bar (and the striker) gets its
  own element length ``dx = c0 dt``. At Courant 1 the staggered scheme is
  exact for the 1-D wave equation (its numerical dispersion relation reduces
  to ``omega = c0 k``, so a step front crosses one element per step with no
  ringing). The modelled bar lengths are therefore whole numbers of elements:
  each bar length is rounded to the nearest ``c0 dt`` (error at most
  ``c0 dt / 2``, about 0.1 mm on a typical rig); the lengths used are reported
  in :attr:`VirtualShotResult.grid`.
* **Why not sub-cycling, nor Courant < 1 in the bars.** A short specimen forces
  a small ``dt``. Instead of running the bars at Courant < 1 (dispersive:
  trailing oscillations behind every front) or sub-cycling the specimen (an
  interface-coupling error of order the bar step), the bar elements are made
  shorter so the bars stay at Courant 1. The price is grid size: cost grows
  as ``1/dt**2``. For a 5 mm metal specimen this is about 13 000 nodes and
  20 000 steps, a few seconds (see ``benchmarks/bench_simulate.py``). The
  specimen and shaper themselves run at Courant ``c dt/dx <= 1`` (reported).
* **Contact.** Neighbouring rods touch through compression-only contacts
  enforced by a momentum-conserving impulse (forward-increment Lagrange
  multiplier, Carpenter et al. 1991): if the two end nodes would overlap at
  the end of the step, an impulse pushes them to a common position. While
  closed, the pair moves as one node; a contact never carries tension, so
  rods separate freely. The first impact is a perfectly inelastic collision
  of the two end half-element masses, which loses ``mu v**2 / 2``
  (``mu`` = reduced mass of the two half elements), a fraction ``~dx/(4 L)``
  of the striker energy; this is the only energy the scheme loses in an
  elastic run.
* **Plasticity.** Specimen and shaper elements use a 1-D radial return
  (Simo & Hughes 1998, section 1.4) with isotropic hardening on a flow stress
  ``flow_stress(plastic_strain, strain_rate)``; the rate argument is the
  element's total strain-rate magnitude over the step (explicit; in steady
  plastic flow it equals the plastic rate up to the small elastic part).
* **Small strain, engineering quantities.** The bars are small-strain
  (they stay elastic). The specimen and shaper are modelled in engineering
  quantities: constant cross-section, element stress = force / initial area,
  strain = change of length / initial length. A law is therefore applied to
  engineering stress and strain; for strains beyond a few per cent this
  differs from a true-stress law. The truth columns are consistent with the
  model (engineering), which is what a Kolsky reduction also reports.

Signs: inside the model tension is positive and x runs from the striker to
the transmitted bar; every output is compression positive.

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
   1998, section 1.4 (1-D return mapping), doi:10.1007/b98904.
.. [5] G. R. Johnson, W. H. Cook, "A constitutive model and data for metals
   subjected to large strains, high strain rates and high temperatures",
   Proc. 7th Int. Symp. Ballistics, The Hague, 1983, 541-547.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Optional

import numpy as np
import pandas as pd

from .errors import InputError

__all__ = [
    "PerfectlyPlastic",
    "JohnsonCookLaw",
    "FlowStressLaw",
    "johnson_cook_flow_stress",
    "radial_return",
    "RodSpec",
    "VirtualShotSpec",
    "VirtualShotResult",
    "simulate_shot",
]


# --------------------------------------------------------------------------- constitutive laws
def johnson_cook_flow_stress(plastic_strain, strain_rate, A, B, n, C, reference_rate=1.0):
    """Johnson-Cook flow stress at constant temperature.

    ``sigma_y = (A + B eps_p**n) (1 + C ln(rate / rate0))``

    Parameters
    ----------
    plastic_strain : array_like
        Equivalent plastic strain eps_p [1] (>= 0).
    strain_rate : array_like
        Strain rate magnitude [1/s].
    A, B : float
        Yield stress and hardening modulus [Pa].
    n : float
        Hardening exponent [1].
    C : float
        Rate sensitivity [1].
    reference_rate : float
        Reference strain rate rate0 [1/s].

    Returns
    -------
    ndarray
        Flow stress [Pa].

    Notes
    -----
    Rates below ``reference_rate`` use ``ln = 0`` (the rate term is not
    allowed to soften the law below its quasi-static value; common practice,
    since the logarithm diverges at zero rate). The thermal-softening factor
    ``(1 - T*^m)`` of the full model is 1 here (T* = 0).

    References
    ----------
    .. [1] G. R. Johnson, W. H. Cook, Proc. 7th Int. Symp. Ballistics, 1983,
       541-547.
    """
    p = np.maximum(np.asarray(plastic_strain, dtype=float), 0.0)
    ratio = np.maximum(np.asarray(strain_rate, dtype=float) / reference_rate, 1.0)
    return (A + B * p**n) * (1.0 + C * np.log(ratio))


@dataclass(frozen=True)
class PerfectlyPlastic:
    """Elastic-perfectly-plastic law: constant flow stress ``yield_stress`` [Pa]."""

    yield_stress: float

    def flow_stress(self, plastic_strain, strain_rate):
        """Flow stress [Pa] (the yield stress, whatever the strain and rate)."""
        return np.full(np.shape(plastic_strain), float(self.yield_stress))


@dataclass(frozen=True)
class JohnsonCookLaw:
    """Elastic with Johnson-Cook hardening at constant temperature.

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
    """

    A: float
    B: float
    n: float
    C: float
    reference_rate: float = 1.0

    def flow_stress(self, plastic_strain, strain_rate):
        """Flow stress [Pa]; see :func:`johnson_cook_flow_stress`."""
        return johnson_cook_flow_stress(plastic_strain, strain_rate, self.A, self.B, self.n, self.C,
                                        self.reference_rate)


@dataclass(frozen=True)
class FlowStressLaw:
    """Elastic-plastic with a user flow stress ``function(plastic_strain [1], strain_rate [1/s]) -> [Pa]``.

    The function must accept numpy arrays and return flow stresses >= 0.
    """

    function: Callable

    def flow_stress(self, plastic_strain, strain_rate):
        """Flow stress [Pa] from the user function."""
        out = np.asarray(self.function(plastic_strain, strain_rate), dtype=float)
        return np.broadcast_to(out, np.shape(plastic_strain))


def _as_law(law, where):
    """A law object (with ``flow_stress``), a bare callable wrapped, or None (elastic)."""
    if law is None or hasattr(law, "flow_stress"):
        return law
    if callable(law):
        return FlowStressLaw(law)
    raise InputError(f"expected None, a law with flow_stress(), or a callable, got {law!r}", where)


def radial_return(trial_stress, plastic_strain, strain_rate, modulus, flow_stress, *, rtol=1e-10, max_iter=60):
    """One-dimensional return mapping with isotropic hardening.

    Solves, for each element whose trial stress exceeds the flow stress,
    ``|sigma_trial| - E dg - sigma_y(eps_p + dg, rate) = 0`` for the plastic
    strain increment ``dg >= 0`` (safeguarded Newton iteration inside the
    bracket ``[0, |sigma_trial|/E]``).

    Parameters
    ----------
    trial_stress : ndarray
        Elastic trial stress E (eps - eps_plastic_old) [Pa], tension positive.
    plastic_strain : ndarray
        Accumulated equivalent plastic strain before the step [1].
    strain_rate : ndarray
        Strain-rate magnitude passed to the flow stress [1/s].
    modulus : float
        Young's modulus E [Pa].
    flow_stress : callable
        ``flow_stress(plastic_strain, strain_rate) -> Pa``, non-decreasing
        in plastic strain is not required.
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
       1998, section 1.4, doi:10.1007/b98904.
    """
    trial = np.asarray(trial_stress, dtype=float)
    size = np.abs(trial)
    p = np.asarray(plastic_strain, dtype=float)
    rate = np.broadcast_to(np.asarray(strain_rate, dtype=float), trial.shape)
    increment = np.zeros_like(trial)
    excess = size - flow_stress(p, rate)
    yielding = np.flatnonzero(excess > 0.0)
    if yielding.size:
        increment[yielding] = _solve_increment(size[yielding], p[yielding], rate[yielding], excess[yielding],
                                               modulus, flow_stress, rtol, max_iter)
    return trial - np.sign(trial) * modulus * increment, increment


def _solve_increment(size, p, rate, excess, E, flow_stress, rtol, max_iter):
    # g(x) = |s_trial| - E x - s_y(p + x); g(0) > 0 and g(|s_trial|/E) <= 0 since s_y >= 0,
    # so the root is bracketed and bisection can always take over from Newton.
    lo = np.zeros_like(size)
    hi = size / E
    x = excess / E  # exact for a perfectly plastic law
    tol = rtol * size
    for _ in range(max_iter):
        g = size - E * x - flow_stress(p + x, rate)
        if np.all(np.abs(g) <= tol):
            break
        lo = np.where(g > 0.0, x, lo)
        hi = np.where(g > 0.0, hi, x)
        h = np.maximum(1e-7 * (p + x), 1e-12)
        slope = E + (flow_stress(p + x + h, rate) - flow_stress(p + x, rate)) / h
        with np.errstate(divide="ignore", invalid="ignore"):
            step = x + g / slope
        inside = (step > lo) & (step < hi) & np.isfinite(step)
        x = np.where(inside, step, 0.5 * (lo + hi))
    return x


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
        ``flow_stress(plastic_strain, strain_rate) -> Pa`` method
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


@dataclass(frozen=True, kw_only=True)
class VirtualShotSpec:
    """Everything one virtual shot needs (SI units).

    Attributes
    ----------
    striker, incident, transmitted : RodSpec
        Striker bar, incident bar and transmitted bar (elastic).
    specimen : RodSpec or None
        Specimen between the bars; None for a bars-together shot.
    striker_speed : float
        Impact speed of the striker [m/s] (> 0).
    gauge_incident_distance : float
        Gauge station on the incident bar, distance from its specimen face [m].
    gauge_transmitted_distance : float
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
        only with a shaper (without one the force jumps at the impact).
    """

    striker: RodSpec
    incident: RodSpec
    transmitted: RodSpec
    specimen: Optional[RodSpec]
    striker_speed: float
    gauge_incident_distance: float
    gauge_transmitted_distance: float
    duration: float
    sample_rate: float
    shaper: Optional[RodSpec] = None
    specimen_elements: int = 20
    shaper_elements: int = 10
    max_time_step: float = 0.1e-6
    foot_fraction: float = 1e-3


@dataclass
class VirtualShotResult:
    """What a virtual shot returns.

    Attributes
    ----------
    time : ndarray
        Record time [s], t = 0 at impact.
    strain_incident_gauge, strain_transmitted_gauge : ndarray
        Bar strain at the two gauge stations [1], compression positive.
    foot_arrival_time : float
        Record time at which the incident wave's foot reaches the specimen
        front face (the incident bar's specimen-side end) [s].
    truth : pandas.DataFrame
        On the shifted time base (t = 0 at ``foot_arrival_time``), one row per
        sample: ``time_us``; ``stress_MPa`` (mean of the specimen element
        stresses, engineering, compression positive); ``strain`` (mean
        engineering strain); ``strain_rate_per_s`` ((v_front - v_back)/L_s);
        ``force_front_kN``, ``force_back_kN`` (contact forces on the incident-
        and transmitted-bar faces, compression positive). Specimen columns
        are NaN for a bars-together shot.
    energies : pandas.DataFrame
        ``time_us`` (shifted), ``kinetic_J``, ``strain_J`` (recoverable
        elastic), ``plastic_J`` (work dissipated by plastic flow so far),
        ``total_J``; kinetic energy in the leapfrog-consistent form
        ``sum m v(n-1/2) v(n+1/2) / 2``.
    grid : dict
        Time step, element counts, element lengths, modelled lengths and
        Courant numbers of each rod; the initial kinetic energy.
    spec : VirtualShotSpec
        The input.
    """

    time: np.ndarray
    strain_incident_gauge: np.ndarray
    strain_transmitted_gauge: np.ndarray
    foot_arrival_time: float
    truth: pd.DataFrame
    energies: pd.DataFrame
    grid: dict
    spec: VirtualShotSpec = field(repr=False)


# --------------------------------------------------------------------------- validation & grid
def _check_rod(rod, name):
    if not isinstance(rod, RodSpec):
        raise InputError(f"expected a RodSpec, got {type(rod).__name__}", f"VirtualShotSpec.{name}")
    for attr in ("length", "diameter", "modulus", "density"):
        value = getattr(rod, attr)
        if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
            raise InputError(f"expected a positive finite {attr}, got {value!r}", f"VirtualShotSpec.{name}.{attr}")
    return _as_law(rod.law, f"VirtualShotSpec.{name}.law")


def _check_spec(spec):
    laws = {}
    for name in ("striker", "incident", "transmitted"):
        laws[name] = _check_rod(getattr(spec, name), name)
    for name in ("specimen", "shaper"):
        if getattr(spec, name) is not None:
            laws[name] = _check_rod(getattr(spec, name), name)
    for name in ("striker_speed", "duration", "sample_rate", "max_time_step"):
        value = getattr(spec, name)
        if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
            raise InputError(f"expected a positive finite number, got {value!r}", f"VirtualShotSpec.{name}")
    for name, bar in (("gauge_incident_distance", spec.incident), ("gauge_transmitted_distance", spec.transmitted)):
        d = getattr(spec, name)
        if not (isinstance(d, (int, float)) and 0 <= d <= bar.length):
            raise InputError(f"expected a distance from the specimen face within the bar (0 to {bar.length} m), "
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
    """Common time step [s] and the number of steps per recorder sample (None: interpolate in time)."""
    dt_max = spec.max_time_step
    for rod, n in ((spec.specimen, spec.specimen_elements), (spec.shaper, spec.shaper_elements)):
        if rod is not None:  # Courant <= 1 in the finely resolved parts (elastic wave speed is the fastest)
            dt_max = min(dt_max, rod.length / int(n) / rod.wave_speed)
    interval = 1.0 / spec.sample_rate
    if interval >= dt_max:
        per_sample = math.ceil(interval / dt_max - 1e-9)
        return interval / per_sample, per_sample
    return dt_max, None  # recorder faster than the model: resample by linear interpolation


@dataclass
class _Rod:
    name: str
    spec: RodSpec
    law: object
    n: int  # elements
    dx: float
    node0: int  # first global node
    link0: int  # first global element ("link")

    @property
    def links(self):
        return slice(self.link0, self.link0 + self.n)

    @property
    def last_node(self):
        return self.node0 + self.n


def _build_rods(spec, laws, dt):
    chain = [("striker", spec.striker, None)]
    if spec.shaper is not None:
        chain.append(("shaper", spec.shaper, int(spec.shaper_elements)))
    chain.append(("incident", spec.incident, None))
    if spec.specimen is not None:
        chain.append(("specimen", spec.specimen, int(spec.specimen_elements)))
    chain.append(("transmitted", spec.transmitted, None))
    rods, node0 = [], 0
    for name, rod, n in chain:
        if n is None:  # bar or striker: Courant exactly 1, length rounded to whole elements
            dx = rod.wave_speed * dt
            n = max(1, int(round(rod.length / dx)))
        else:
            dx = rod.length / n
        # nodes node0 .. node0+n; elements node0-k .. are links between consecutive global nodes;
        # the link joining two rods (index node0 - 1) is a dummy with zero stiffness
        rods.append(_Rod(name, rod, laws.get(name), n, dx, node0, node0))
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
    laws = _check_spec(spec)
    dt, per_sample = _time_step(spec)
    rods = _build_rods(spec, laws, dt)
    by_name = {r.name: r for r in rods}
    n_nodes = rods[-1].node0 + rods[-1].n + 1
    n_steps = math.ceil(spec.duration / dt - 1e-9)
    stride = per_sample or 1

    # --- per-node and per-link properties (links between rods are inert dummies)
    mass = np.zeros(n_nodes)
    EA = np.zeros(n_nodes - 1)
    dt_over_dx = np.zeros(n_nodes - 1)
    dx_over_EA = np.zeros(n_nodes - 1)  # for the elastic strain energy F^2 dx / (2 EA)
    link_len = np.zeros(n_nodes - 1)
    for r in rods:
        s = r.spec
        m_el = s.density * s.area * r.dx
        mass[r.node0:r.last_node] += 0.5 * m_el
        mass[r.node0 + 1:r.last_node + 1] += 0.5 * m_el
        EA[r.links] = s.modulus * s.area
        dt_over_dx[r.links] = dt / r.dx
        dx_over_EA[r.links] = r.dx / (s.modulus * s.area)
        link_len[r.links] = r.dx
    dt_over_m = dt / mass

    # --- state (tension positive, x from striker to transmitted bar)
    v = np.zeros(n_nodes)
    striker = by_name["striker"]
    v[striker.node0:striker.last_node + 1] = spec.striker_speed
    eps = np.zeros(n_nodes - 1)
    F_pad = np.zeros(n_nodes + 1)  # element forces with a zero at each end of the chain
    F = F_pad[1:-1]
    node_force = np.zeros(n_nodes)
    dv = np.zeros(n_nodes - 1)
    plastic = [_PlasticState(r) for r in rods if r.law is not None]

    # --- contacts: (left rod's last node, right rod's first node)
    a_idx = np.array([r.last_node for r in rods[:-1]])
    b_idx = np.array([r.node0 for r in rods[1:]])
    inv_ma, inv_mb = 1.0 / mass[a_idx], 1.0 / mass[b_idx]
    inv_w = 1.0 / (dt * (inv_ma + inv_mb))
    gap = np.zeros(a_idx.size)
    pair = {rods[i + 1].name: i for i in range(len(rods) - 1)}  # contact on the left of each rod
    i_impact = pair["incident"]
    i_front = pair["specimen"] if spec.specimen is not None else pair["transmitted"]
    i_back = pair["transmitted"]
    impact_force = np.zeros(n_steps + 1)

    # --- recording
    gauge_inc = _gauge_weights(by_name["incident"], spec.gauge_incident_distance, from_end=True)
    gauge_tra = _gauge_weights(by_name["transmitted"], spec.gauge_transmitted_distance, from_end=False)
    n_rec = n_steps // stride + 1
    rec = np.full((n_rec, 11), np.nan)
    spec_rod = by_name.get("specimen")
    v_old = np.empty_like(v)
    e0 = 0.5 * float(np.sum(mass * v * v))

    for n in range(n_steps + 1):
        record = n % stride == 0
        if record:
            v_old[:] = v
        # nodes: v(n-1/2) -> v(n+1/2) from the element forces at n
        np.subtract(F_pad[1:], F_pad[:-1], out=node_force)
        node_force *= dt_over_m
        v += node_force
        # compression-only contacts: impulse that stops the end nodes overlapping at n+1
        va, vb = v[a_idx], v[b_idx]
        g = gap + dt * (vb - va)
        impulse = np.maximum(-g, 0.0) * inv_w
        v[a_idx] = va - impulse * inv_ma
        v[b_idx] = vb + impulse * inv_mb
        np.maximum(g, 0.0, out=gap)
        impact_force[n] = impulse[i_impact] / dt
        if record:
            row = rec[n // stride]
            row[0] = n * dt
            row[1] = -(gauge_inc[2] * eps[gauge_inc[0]] + gauge_inc[3] * eps[gauge_inc[1]])
            row[2] = -(gauge_tra[2] * eps[gauge_tra[0]] + gauge_tra[3] * eps[gauge_tra[1]])
            row[6] = impulse[i_front] / dt
            row[7] = impulse[i_back] / dt
            if spec_rod is not None:
                sl = spec_rod.links
                row[3] = -np.mean(F[sl]) / spec_rod.spec.area
                row[4] = -np.mean(eps[sl])
                v_front = 0.5 * (v_old[spec_rod.node0] + v[spec_rod.node0])
                v_back = 0.5 * (v_old[spec_rod.last_node] + v[spec_rod.last_node])
                row[5] = (v_front - v_back) / spec_rod.spec.length
            # explicit multiply-and-sum: BLAS dot spawns threads that stall on small shared machines
            row[8] = 0.5 * float(np.multiply(np.multiply(mass, v_old, out=v_old), v, out=v_old).sum())
            row[9] = 0.5 * float(np.multiply(np.multiply(F, F, out=dv), dx_over_EA, out=dv).sum())
            row[10] = sum(p.work for p in plastic)
        if n == n_steps:
            break
        # elements: strain n -> n+1 from v(n+1/2); elastic forces, then the plastic parts
        np.subtract(v[1:], v[:-1], out=dv)
        dv *= dt_over_dx
        eps += dv
        np.multiply(EA, eps, out=F)
        for p in plastic:
            p.update(eps, dv, dt, F)

    return _assemble(spec, rods, dt, per_sample, rec, impact_force, e0)


def _gauge_weights(rod, distance, from_end):
    """Two element indices and linear weights for a station ``distance`` [m] from the specimen face."""
    # element i has its centre at (i + 1/2) dx from the rod's first node
    pos = (rod.n * rod.dx - distance) if from_end else distance
    x = min(max(pos / rod.dx - 0.5, 0.0), rod.n - 1.0)
    i = min(int(math.floor(x)), rod.n - 2) if rod.n > 1 else 0
    w = x - i
    j = min(i + 1, rod.n - 1)
    return rod.link0 + i, rod.link0 + j, 1.0 - w, w


class _PlasticState:
    """Plastic strain and dissipated work of one rod with a constitutive law."""

    def __init__(self, rod: _Rod):
        self.rod = rod
        self.sl = rod.links
        self.E = rod.spec.modulus
        self.A = rod.spec.area
        self.eps_p = np.zeros(rod.n)  # signed plastic strain
        self.p = np.zeros(rod.n)  # accumulated equivalent plastic strain
        self.work = 0.0  # plastic work [J]
        self.flow = rod.law.flow_stress
        self.vol = rod.spec.area * rod.dx

    def update(self, eps, dv, dt, F):
        trial = self.E * (eps[self.sl] - self.eps_p)
        rate = np.abs(dv[self.sl]) / dt
        stress, inc = radial_return(trial, self.p, rate, self.E, self.flow)
        if inc.any():
            self.eps_p += np.sign(trial) * inc
            self.p += inc
            # dissipated work: stress at the end of the step times plastic increment (first order)
            self.work += float((np.abs(stress) * inc).sum()) * self.vol
        F[self.sl] = stress * self.A


def _assemble(spec, rods, dt, per_sample, rec, impact_force, e0):
    by_name = {r.name: r for r in rods}
    inc = by_name["incident"]
    peak = impact_force.max()
    n_enter = int(np.argmax(impact_force > spec.foot_fraction * peak)) if peak > 0 else 0
    # the foot crosses one incident-bar element per step (Courant 1)
    foot = (n_enter + inc.n) * dt
    t_model = rec[:, 0]
    if per_sample is None:  # resample onto the recorder's clock
        t_out = np.arange(0.0, t_model[-1] + 0.5 / spec.sample_rate, 1.0 / spec.sample_rate)
        t_out = t_out[t_out <= t_model[-1] + 1e-15]
        rec = np.column_stack([t_out] + [np.interp(t_out, t_model, rec[:, k]) for k in range(1, rec.shape[1])])
    time = rec[:, 0]
    keep = time <= spec.duration * (1 + 1e-12)
    rec, time = rec[keep], time[keep]
    t_us = (time - foot) * 1e6
    truth = pd.DataFrame({
        "time_us": t_us,
        "stress_MPa": rec[:, 3] * 1e-6,
        "strain": rec[:, 4],
        "strain_rate_per_s": rec[:, 5],
        "force_front_kN": rec[:, 6] * 1e-3,
        "force_back_kN": rec[:, 7] * 1e-3,
    })
    energies = pd.DataFrame({
        "time_us": t_us,
        "kinetic_J": rec[:, 8],
        "strain_J": rec[:, 9],
        "plastic_J": rec[:, 10],
        "total_J": rec[:, 8] + rec[:, 9] + rec[:, 10],
    })
    grid = {
        "dt_s": dt,
        "steps": len(impact_force) - 1,
        "steps_per_sample": per_sample,
        "time_interpolated": per_sample is None,
        "nodes": rods[-1].node0 + rods[-1].n + 1,
        "initial_kinetic_J": e0,
        "rods": {
            r.name: {
                "elements": r.n,
                "element_length_m": r.dx,
                "length_m": r.n * r.dx,
                "courant": r.spec.wave_speed * dt / r.dx,
            }
            for r in rods
        },
    }
    return VirtualShotResult(time=time, strain_incident_gauge=rec[:, 1].copy(),
                             strain_transmitted_gauge=rec[:, 2].copy(), foot_arrival_time=foot,
                             truth=truth, energies=energies, grid=grid, spec=spec)
