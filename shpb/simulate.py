"""Virtual shot: one-dimensional wave propagation through a whole pressure-bar rig.

The rig is a chain of 1-D rods in compression-only contact::

    striker -> [pulse shaper] -> incident bar -> [specimen] -> transmitted bar

The pulse shaper sits on the impact face of the incident bar, where shapers
are placed in practice (Frew, Forrestal & Chen 2002); without a specimen the
bars touch (a bars-together shot).

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
  (exact for its elastic waves), the other at Courant <= 1 with the fewest
  elements that allow it. A short specimen thus forces a small ``dt``. Rather
  than run the bars at Courant < 1 (dispersive: oscillations trail every
  front) or sub-cycle the specimen (an interface-coupling error of the order
  of the bar step, where the reduction is most sensitive), the bar elements
  are shortened to ``c0 dt`` so the bars stay exact. The price is grid size,
  cost ~ ``1/dt**2``: for a 5 mm metal specimen on 1.5 m bars, about 13 000
  nodes and 20 000 steps per millisecond, about two seconds (see
  ``benchmarks/bench_simulate.py``). Without a specimen or shaper, ``dt`` is
  the largest divisor of the sample interval not above ``max_time_step``.
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
  and goes unstable at the Courant-1 step.
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
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass, field
from typing import Callable, Optional

import numpy as np
import pandas as pd

from .errors import AnalysisError, InputError

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
        Plastic strain rate [1/s] (Johnson & Cook's dimensionless rate times
        ``reference_rate``).
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

    The function receives numpy arrays (equivalent plastic strain and plastic
    strain rate) and must return flow stresses >= 0, finite at zero rate
    (the quasi-static limit used for the yield check).
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


def radial_return(trial_stress, plastic_strain, modulus, flow_stress, dt, *, guess=None, rtol=1e-10, max_iter=60):
    """One-dimensional return mapping with isotropic and rate hardening.

    For each element whose trial stress exceeds the quasi-static flow stress
    ``flow_stress(eps_p, 0)``, solves (backward Euler)

    ``|sigma_trial| - E dg - flow_stress(eps_p + dg, dg / dt) = 0``

    for the plastic strain increment ``dg >= 0`` by a safeguarded Newton
    iteration inside the bracket ``[0, |sigma_trial| / E]``. The rate passed
    to the flow stress is the plastic strain rate ``dg / dt``, so rate
    hardening is treated implicitly (an explicit rate term acts like an
    explicit viscosity and goes unstable at the Courant-1 time step).

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
    yielding = np.flatnonzero(size > flow_stress(p, np.zeros_like(p)))
    if yielding.size:
        x0 = None if guess is None else np.asarray(guess, dtype=float)[yielding]
        increment[yielding] = _solve_increment(size[yielding], p[yielding], modulus, flow_stress, dt, x0,
                                               rtol, max_iter)
    return trial - np.sign(trial) * modulus * increment, increment


def _solve_increment(size, p, E, flow_stress, dt, x0, rtol, max_iter):
    # g(x) = |s_trial| - E x - s_y(p + x, x/dt) has g(0) > 0 (the yield check) and g(|s_trial|/E) <= 0
    # since s_y >= 0: the root is bracketed, so bisection can always take over from Newton.
    lo = np.zeros_like(size)
    hi = size / E
    x = (size - flow_stress(p, np.zeros_like(p))) / E  # exact for a rate-independent perfectly plastic law
    if x0 is not None:  # warm start from the previous step where it lies inside the bracket
        x = np.where((x0 > 0.0) & (x0 < hi), x0, x)
    tol = rtol * size
    for _ in range(max_iter):
        g = size - E * x - flow_stress(p + x, x / dt)
        if np.all(np.abs(g) <= tol):
            break
        lo = np.where(g > 0.0, x, lo)
        hi = np.where(g > 0.0, hi, x)
        h = np.maximum(1e-6 * x, 1e-15)
        slope = E + (flow_stress(p + x + h, (x + h) / dt) - flow_stress(p + x, x / dt)) / h
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
        front face (the incident bar's specimen-side end) [s]: the time it
        enters the incident bar plus the modelled bar length over c0. With a
        specimen, the specimen starts to load up to ``dt / 2`` earlier (see
        the module notes on bar ends).
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
        ``dt_s``, ``steps``, ``steps_per_sample``, ``nodes``,
        ``initial_kinetic_J`` and, per rod under ``rods``: ``elements``,
        ``element_length_m``, ``length_m`` (modelled, face to face),
        ``courant``; for the specimen and shaper also ``peak_strain`` (largest
        mean engineering compression) and ``peak_element_strain``.
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
    for name in ("striker", "incident", "transmitted"):
        laws[name] = _check_rod(getattr(spec, name), name)
    for name in ("specimen", "shaper"):
        if getattr(spec, name) is not None:
            laws[name] = _check_rod(getattr(spec, name), name)
    for name in ("striker_speed", "duration", "sample_rate", "max_time_step"):
        value = getattr(spec, name)
        if not (_is_number(value) and math.isfinite(value) and value > 0):
            raise InputError(f"expected a positive finite number, got {value!r}", f"VirtualShotSpec.{name}")
    for name, bar in (("gauge_incident_distance", spec.incident), ("gauge_transmitted_distance", spec.transmitted)):
        d = getattr(spec, name)
        if not (_is_number(d) and 0 <= d <= bar.length):
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
    chain = [("striker", spec.striker, None)]
    if spec.shaper is not None:
        chain.append(("shaper", spec.shaper, int(spec.shaper_elements)))
    chain.append(("incident", spec.incident, None))
    if spec.specimen is not None:
        chain.append(("specimen", spec.specimen, int(spec.specimen_elements)))
    chain.append(("transmitted", spec.transmitted, None))
    resolved = [n is not None for _, _, n in chain]
    rods, node0 = [], 0
    for k, (name, rod, n) in enumerate(chain):
        cap_start = n is None and k > 0 and resolved[k - 1]
        cap_end = n is None and k + 1 < len(chain) and resolved[k + 1]
        if n is None:  # bar or striker: Courant exactly 1, length rounded to whole elements
            dx = rod.wave_speed * dt
            n = max(1, int(round(rod.length / dx - 0.5 * (cap_start + cap_end))))
        else:  # resolved rod: as few elements (>= the minimum) as keep its Courant number <= 1
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
    laws = _check_spec(spec)
    dt = _time_step(spec)
    rods = _build_rods(spec, laws, dt)
    # recorder clock: the model keeps the two steps around each sample time, then interpolates
    t_samples = np.arange(int(math.floor(spec.duration * spec.sample_rate + 1e-9)) + 1) / spec.sample_rate
    lower = np.floor(t_samples / dt + 1e-9).astype(np.int64)
    kept_steps = np.union1d(lower, lower + 1)
    rec, impact_force, e0, peak = _run(spec, rods, dt, kept_steps)
    for name, (value, _) in peak.items():
        if value >= 1.0:
            raise AnalysisError(f"the {name} was crushed to zero length (engineering strain {value:.2f}); the "
                                f"small-strain model does not hold: shorten the record or soften the impact")
    return _assemble(spec, rods, dt, t_samples, rec, impact_force, e0, peak)


def _masses_and_stiffness(rods, n_nodes, dt):
    """Lumped nodal masses [kg] and per-link EA [N], dt/dx [s/m], dx/(EA) [m/N]; zero on the joints."""
    mass = np.zeros(n_nodes)
    EA, dt_over_dx, dx_over_EA = np.zeros(n_nodes - 1), np.zeros(n_nodes - 1), np.zeros(n_nodes - 1)
    for r in rods:
        s = r.spec
        m_el = s.density * s.area * r.dx
        mass[r.node0:r.last_node] += 0.5 * m_el
        mass[r.node0 + 1:r.last_node + 1] += 0.5 * m_el
        mass[r.node0] += 0.5 * m_el * r.cap_start  # a capped end carries a whole element
        mass[r.last_node] += 0.5 * m_el * r.cap_end
        EA[r.links] = s.modulus * s.area
        dt_over_dx[r.links] = dt / r.dx
        dx_over_EA[r.links] = r.dx / (s.modulus * s.area)
    return mass, EA, dt_over_dx, dx_over_EA


def _run(spec, rods, dt, kept_steps):
    """March the leapfrog scheme; return the kept rows, the force entering the incident bar, E0, peak strains."""
    by_name = {r.name: r for r in rods}
    n_nodes = rods[-1].last_node + 1
    n_steps = int(kept_steps[-1])
    row_of_step = np.full(n_steps + 1, -1, dtype=np.int64)
    row_of_step[kept_steps] = np.arange(kept_steps.size)
    mass, EA, dt_over_dx, dx_over_EA = _masses_and_stiffness(rods, n_nodes, dt)
    dt_over_m = dt / mass

    # state: tension positive, x from the striker towards the transmitted bar
    v = np.zeros(n_nodes)
    striker = by_name["striker"]
    v[striker.node0:striker.last_node + 1] = spec.striker_speed
    e0 = 0.5 * float(np.sum(mass * v * v))
    eps = np.zeros(n_nodes - 1)
    F_pad = np.zeros(n_nodes + 1)  # element forces with a zero beyond each end of the chain
    F = F_pad[1:-1]
    node_force, dv, v_old = np.zeros(n_nodes), np.zeros(n_nodes - 1), np.zeros(n_nodes)
    plastic = [_PlasticState(r) for r in rods if r.law is not None]

    # contacts between consecutive rods: (left rod's last node, right rod's first node)
    a_idx = np.array([r.last_node for r in rods[:-1]])
    b_idx = np.array([r.node0 for r in rods[1:]])
    inv_ma, inv_mb = 1.0 / mass[a_idx], 1.0 / mass[b_idx]
    inv_w = 1.0 / (dt * (inv_ma + inv_mb))
    gap = np.zeros(a_idx.size)
    left_of = {rods[i + 1].name: i for i in range(len(rods) - 1)}  # contact on the left of each rod
    i_impact = left_of["incident"]
    i_front = left_of["specimen"] if "specimen" in by_name else left_of["transmitted"]
    i_back = left_of["transmitted"]
    impact_force = np.zeros(n_steps + 1)

    gauge_inc = _gauge_weights(by_name["incident"], spec.gauge_incident_distance, from_end=True)
    gauge_tra = _gauge_weights(by_name["transmitted"], spec.gauge_transmitted_distance, from_end=False)
    specimen = by_name.get("specimen")
    resolved = [r for r in rods if r.name in ("specimen", "shaper")]
    peak = {r.name: (0.0, 0.0) for r in resolved}
    rec = np.full((kept_steps.size, 11), np.nan)

    for n in range(n_steps + 1):
        i_row = row_of_step[n]
        if i_row >= 0:
            v_old[:] = v
        # nodes: v(n-1/2) -> v(n+1/2) from the element forces at n
        np.subtract(F_pad[1:], F_pad[:-1], out=node_force)
        node_force *= dt_over_m
        v += node_force
        # compression-only contacts: the impulse that stops the end nodes overlapping at n+1
        va, vb = v[a_idx], v[b_idx]
        g = gap + dt * (vb - va)
        impulse = np.maximum(-g, 0.0) * inv_w
        v[a_idx] = va - impulse * inv_ma
        v[b_idx] = vb + impulse * inv_mb
        np.maximum(g, 0.0, out=gap)
        impact_force[n] = impulse[i_impact] / dt
        if i_row >= 0:
            row = rec[i_row]
            row[0] = n * dt
            row[1] = -(gauge_inc[2] * eps[gauge_inc[0]] + gauge_inc[3] * eps[gauge_inc[1]])
            row[2] = -(gauge_tra[2] * eps[gauge_tra[0]] + gauge_tra[3] * eps[gauge_tra[1]])
            row[6:8] = impulse[[i_front, i_back]] / dt
            if specimen is not None:
                sl = specimen.links
                row[3] = -F[sl].mean() / specimen.spec.area
                row[4] = -eps[sl].mean()
                # velocities at n: mean of the half steps on either side
                v_front = 0.5 * (v_old[specimen.node0] + v[specimen.node0])
                v_back = 0.5 * (v_old[specimen.last_node] + v[specimen.last_node])
                row[5] = (v_front - v_back) / specimen.spec.length
            # multiply-and-sum rather than np.dot: BLAS threads stall on small shared machines
            row[8] = 0.5 * float(np.multiply(np.multiply(mass, v_old, out=v_old), v, out=v_old).sum())
            row[9] = 0.5 * float(np.multiply(np.multiply(F, F, out=dv), dx_over_EA, out=dv).sum())
            row[10] = sum(p.work for p in plastic)
            for r in resolved:  # largest mean and element compressions, to catch a crushed rod
                mean_peak, element_peak = peak[r.name]
                strains = eps[r.links]
                peak[r.name] = (max(mean_peak, -float(strains.mean())), max(element_peak, -float(strains.min())))
        if n == n_steps:
            break
        # elements: strain n -> n+1 from v(n+1/2); elastic forces, then the plastic rods
        np.subtract(v[1:], v[:-1], out=dv)
        dv *= dt_over_dx
        eps += dv
        np.multiply(EA, eps, out=F)
        for p in plastic:
            p.update(eps, dt, F)
    return rec, impact_force, e0, peak


def _gauge_weights(rod, distance, from_end):
    """Two element indices and linear weights for a station ``distance`` [m] from the specimen face."""
    # element i has its centre at (i + 1/2) dx from the rod's first node; faces of capped ends
    # lie half an element beyond the end node
    if from_end:
        pos = (rod.n + 0.5 * rod.cap_end) * rod.dx - distance
    else:
        pos = distance - 0.5 * rod.cap_start * rod.dx
    x = min(max(pos / rod.dx - 0.5, 0.0), rod.n - 1.0)
    i = min(int(math.floor(x)), rod.n - 2) if rod.n > 1 else 0
    w = x - i
    j = min(i + 1, rod.n - 1)
    return rod.node0 + i, rod.node0 + j, 1.0 - w, w


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
        self.last_increment = np.zeros(rod.n)  # warm start of the return mapping
        self.flow = rod.law.flow_stress
        self.vol = rod.spec.area * rod.dx

    def update(self, eps, dt, F):
        trial = self.E * (eps[self.sl] - self.eps_p)
        stress, inc = radial_return(trial, self.p, self.E, self.flow, dt, guess=self.last_increment)
        self.last_increment = inc
        if inc.any():
            self.eps_p += np.sign(trial) * inc
            self.p += inc
            # dissipated work: stress at the end of the step times plastic increment (first order)
            self.work += float((np.abs(stress) * inc).sum()) * self.vol
        F[self.sl] = stress * self.A


def _assemble(spec, rods, dt, t_samples, rec, impact_force, e0, peak):
    by_name = {r.name: r for r in rods}
    inc = by_name["incident"]
    n_enter = int(np.argmax(impact_force > spec.foot_fraction * impact_force.max()))
    # the foot crosses one incident-bar element per step (Courant 1), face to face
    foot = n_enter * dt + inc.length / inc.spec.wave_speed
    # linear interpolation in time onto the recorder clock; at Courant 1 a bar element's strain is the
    # element average, which varies linearly in time while a front crosses it, so this adds no error there
    time = t_samples
    rec = np.column_stack([time] + [np.interp(time, rec[:, 0], rec[:, k]) for k in range(1, rec.shape[1])])
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
    return VirtualShotResult(time=time, strain_incident_gauge=rec[:, 1].copy(),
                             strain_transmitted_gauge=rec[:, 2].copy(), foot_arrival_time=foot,
                             truth=truth, energies=energies, grid=grid, spec=spec)
