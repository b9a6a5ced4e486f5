"""Planning a shot before it is fired: from a target strain rate and strain to striker, specimen and pulse shaper.

A virtual shot (:mod:`shpb.simulate`) answers "what does this shot give?";
planning asks the inverse: which striker, speed, specimen and pulse shaper
give a chosen strain rate and strain, keep the bars elastic, reach force
equilibrium early and keep the waves apart at the gauges. This module holds
the physics of that choice, as small pure functions, and the search that
makes it (:func:`design_shot`). Reading a plan file, previewing the design
with a virtual shot reduced like a real one, the campaign skeleton and the
figure are at the file edge, :mod:`shpb.planning`.

The rules, each with its source (``docs/planning.md`` explains them):

* **Specimen length.** The inertia term of Davies & Hunter (1963),
  ``rho_s (L**2 / 6 - nu D**2 / 8) d2e/dt2``, vanishes at
  ``L / D = sqrt(3 nu) / 2`` (:func:`davies_hunter_ratio`,
  :func:`inertia_stress`); an L/D near 0.5 also keeps the friction of
  lubricated faces small (common practice).
* **Specimen diameter.** The largest stock diameter whose diameter after the
  target strain (volume constancy, :func:`diameter_after`) stays within the
  bar face and whose force the striker can balance within the gun's speed
  range and the bar-stress limit (:func:`incident_strain_for_rate`).
* **Striker.** A striker of speed v sends ``eps = (v / c_b) Z_s / (Z_s + Z_b)``
  (``v / (2 c0)`` when matched) for ``2 L / c0`` (Kolsky 1953; Graff 1975),
  :func:`shpb.calibrate.striker_incident_strain` and
  :func:`shpb.simulate.incident_bar_stress`.
* **Pulse shaper.** A disc that deforms plastically between striker and bar
  (Frew, Forrestal & Chen 2002): the disc has no inertia and no elasticity,
  its force is its area times its flow stress, and it flows as long as the
  striker face moves faster than the bar face (:func:`shaper_pulse`).
* **Strain rate and strain.** The specimen in force equilibrium between the
  bars (Kolsky 1949): ``L_s de/dt = 2 c_i eps_i - F (1/Z_i + 1/Z_t)`` with
  ``F`` its area times its flow stress (:func:`specimen_response`). It is
  the same disc equation as the shaper's: a plastic disc pressed between
  two elastic rods (:func:`disc_between_rods`).
* **Record.** The pulse must fit in the reduction's own window
  (:func:`shpb.pulses.plan_window`, :func:`shpb.validity.overlap_flag`); the
  record must hold it (:func:`record_needs`).
* **Dispersion.** The rise time of the pulse against the bar radius, through
  the Pochhammer–Chree phase velocity (:func:`dispersion_severity`).

Physics only: no files, no printing. SI units.

References
----------
.. [1] E. D. H. Davies, S. C. Hunter, "The dynamic compression testing of
   solids by the method of the split Hopkinson pressure bar", J. Mech. Phys.
   Solids 11 (1963) 155-179, doi:10.1016/0022-5096(63)90050-4.
.. [2] D. J. Frew, M. J. Forrestal, W. Chen, "Pulse shaping techniques for
   testing brittle materials with a split Hopkinson pressure bar", Exp.
   Mech. 42 (2002) 93-106, doi:10.1007/BF02411056.
.. [3] H. Kolsky, Stress Waves in Solids, Clarendon Press, 1953 (Dover 1963),
   ch. 3 (impact of bars).
.. [4] K. F. Graff, Wave Motion in Elastic Solids, Oxford Univ. Press, 1975,
   ch. 2 (impact of rods) and section 8.2 (Pochhammer-Chree).
.. [5] H. Kolsky, Proc. Phys. Soc. B 62 (1949) 676-700,
   doi:10.1088/0370-1301/62/11/302.
.. [6] G. Ravichandran, G. Subhash, "Critical appraisal of limiting strain
   rates for compression testing of ceramics in a split Hopkinson pressure
   bar", J. Am. Ceram. Soc. 77 (1994) 263-267.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Optional

import numpy as np

from .calibrate import striker_incident_strain
from .errors import AnalysisError, InputError
from .simulate import RodSpec, VirtualShotSpec, bar_rod, incident_bar_stress, plan_shot

__all__ = [
    "davies_hunter_ratio",
    "inertia_stress",
    "diameter_after",
    "incident_strain_for_rate",
    "striker_speed_for_strain",
    "FlowTable",
    "flow_table",
    "DiscResponse",
    "disc_between_rods",
    "shaper_pulse",
    "specimen_response",
    "pulse_timing",
    "Rig",
    "window_check",
    "record_needs",
    "sample_rate_needed",
    "dispersion_severity",
    "MaterialEstimate",
    "ShaperStock",
    "Constraints",
    "Target",
    "Prediction",
    "ShotDesign",
    "predict_shot",
    "design_shot",
    "adjust_design",
    "STANDARD_SAMPLE_RATES",
]

#: Sample rates a digital oscilloscope commonly offers [Hz] (the record's rate is rounded up to one of them).
STANDARD_SAMPLE_RATES = (1e6, 2e6, 2.5e6, 5e6, 10e6, 20e6, 25e6, 50e6, 100e6)
#: Specimen wave transits before force equilibrium under a ramped pulse (Ravichandran & Subhash 1994,
#: about four; Davies & Hunter 1963, about three reverberations; from memory).
TRANSITS_FOR_EQUILIBRIUM = 4.0
#: Fraction of the loading part a design should hold in force equilibrium (the reduction warns below 0.5).
MIN_VALID_FRACTION = 0.6
#: A design counts its forecast in equilibrium only where |R| stays within this fraction of the reduction's
#: threshold: the planning models have no waves inside the specimen, whose ring-up and ripples the
#: reduction's R shows (the virtual-shot previews showed |R| up to twice the models' on dense specimens).
EQUILIBRIUM_MARGIN = 0.6
#: Largest coefficient of variation of the forecast rate over the loading that a design accepts before it tries
#: a smaller specimen: the more the rate varies, the more the mean over the valid part depends on where the
#: reduction finds equilibrium.
MAX_LOADING_CV = 0.35
#: Model time step of the planning models [s]: the rigid-plastic discs have no wave inside, so the step
#: only has to resolve the pulse's rise (tens of microseconds) and the specimen's transits.
MODEL_STEP = 0.2e-6
#: Largest engineering strain a shaper may reach in a design (beyond it the disc's area growth dominates and the
#: one-dimensional virtual shot, which crushes at 1, is no longer a fair preview).
SHAPER_STRAIN_LIMIT = 0.85


# =========================================================================== specimen geometry
def davies_hunter_ratio(poisson_ratio: float) -> float:
    """Length-to-diameter ratio of least inertia error, ``L / D = sqrt(3 nu) / 2`` [1].

    Parameters
    ----------
    poisson_ratio : float
        Poisson ratio nu of the specimen [1] (0 < nu < 0.5; 0.5 for
        incompressible plastic flow).

    Returns
    -------
    float
        L/D at which the inertia term of :func:`inertia_stress` vanishes
        (0.474 for nu = 0.3).

    References
    ----------
    .. [1] E. D. H. Davies, S. C. Hunter, J. Mech. Phys. Solids 11 (1963)
       155-179, doi:10.1016/0022-5096(63)90050-4.
    """
    nu = float(poisson_ratio)
    if not 0.0 < nu <= 0.5:
        raise InputError(f"expected a Poisson ratio in (0, 0.5], got {poisson_ratio!r}", "poisson_ratio")
    return math.sqrt(3.0 * nu) / 2.0


def inertia_stress(density, length, diameter, poisson_ratio, strain_acceleration):
    """Inertia part of the specimen's mean stress [Pa]: ``rho (L**2/6 - nu D**2/8) d2e/dt2``.

    The axial (L**2/6) and radial (nu D**2/8) inertia of a cylinder deforming
    uniformly; the term vanishes at :func:`davies_hunter_ratio`. A planning
    estimate of the error a constant-rate test avoids and a ramp brings.

    Parameters
    ----------
    density : float
        Specimen density rho [kg/m^3].
    length, diameter : float
        Specimen length L and diameter D [m].
    poisson_ratio : float
        Poisson ratio nu [1].
    strain_acceleration : float or array_like
        d2e/dt2 [1/s^2].

    Returns
    -------
    float or ndarray
        [Pa], positive when the inertia adds to the measured stress.

    References
    ----------
    .. [1] E. D. H. Davies, S. C. Hunter, J. Mech. Phys. Solids 11 (1963)
       155-179 (the energy method; from memory).
    """
    return density * (length**2 / 6.0 - poisson_ratio * diameter**2 / 8.0) * np.asarray(strain_acceleration,
                                                                                          dtype=float)


def diameter_after(diameter: float, strain: float) -> float:
    """Diameter [m] of a cylinder compressed to engineering strain ``strain`` at constant volume: ``D / sqrt(1 - e)``."""
    if not 0.0 <= strain < 1.0:
        raise InputError(f"expected an engineering strain in [0, 1), got {strain!r}", "strain")
    return diameter / math.sqrt(1.0 - strain)


# =========================================================================== the Kolsky relations for planning
def incident_strain_for_rate(strain_rate, specimen_length, force, incident: RodSpec,
                             transmitted: Optional[RodSpec] = None) -> float:
    """Incident bar strain [1] that drives a specimen carrying ``force`` at ``strain_rate`` in equilibrium.

    From the face velocities ``v1 = c_i (eps_i - eps_r)``, ``v2 = c_t eps_t``
    and equilibrium ``E_i A_i (eps_i + eps_r) = E_t A_t eps_t = F`` (Kolsky
    1949): ``L_s de/dt = 2 c_i eps_i - F (1/Z_i + 1/Z_t)`` with
    ``Z = rho c0 A``. For identical bars it reads
    ``eps_i = de/dt L_s / (2 c0) + F / (E A)``: the reflected part that sets
    the rate plus the transmitted part that carries the force.

    Parameters
    ----------
    strain_rate : float
        Specimen engineering strain rate [1/s].
    specimen_length : float
        [m].
    force : float
        Specimen force [N] (area times engineering flow stress).
    incident, transmitted : RodSpec
        The bars (transmitted defaults to the incident bar).

    References
    ----------
    .. [1] H. Kolsky, Proc. Phys. Soc. B 62 (1949) 676-700.
    """
    transmitted = transmitted or incident
    compliance = 1.0 / incident.impedance + 1.0 / transmitted.impedance
    return (strain_rate * specimen_length + force * compliance) / (2.0 * incident.wave_speed)


def striker_speed_for_strain(incident_strain, striker: RodSpec, bar: RodSpec) -> float:
    """Impact speed [m/s] whose elastic impact sends ``incident_strain`` into the bar: the inverse of
    :func:`shpb.calibrate.striker_incident_strain` (Kolsky 1953; Graff 1975)."""
    per_unit_speed = striker_incident_strain(1.0, bar.wave_speed, striker.impedance, bar.impedance)
    return float(incident_strain) / per_unit_speed


# =========================================================================== a plastic disc between elastic rods
@dataclass(frozen=True, eq=False)
class FlowTable:
    """A law's engineering flow stress tabulated once, for the planning models' step-by-step march.

    Attributes
    ----------
    plastic_strain : ndarray
        Uniform grid of engineering plastic strain [1], from 0.
    log_rate : ndarray
        Uniform grid of ln(plastic strain rate [1/s]).
    stress : ndarray
        Flow stress [Pa], shape (strain, rate).
    """

    plastic_strain: np.ndarray
    log_rate: np.ndarray
    stress: np.ndarray

    def __post_init__(self):
        # plain lists for the step-by-step march (indexing a list is several times faster than an array)
        object.__setattr__(self, "rows", np.asarray(self.stress, dtype=float).tolist())
        object.__setattr__(self, "first_column", np.asarray(self.stress[:, 0], dtype=float).tolist())
        object.__setattr__(self, "rate_free", bool(np.all(self.stress == self.stress[:, :1])))

    def __call__(self, plastic_strain, strain_rate):
        """Flow stress [Pa] at a plastic strain [1] and rate [1/s] (bilinear in strain and log rate)."""
        e = np.clip(np.asarray(plastic_strain, dtype=float), 0.0, self.plastic_strain[-1])
        lr = np.clip(np.log(np.maximum(np.asarray(strain_rate, dtype=float), 1e-300)), self.log_rate[0],
                     self.log_rate[-1])
        x = e / (self.plastic_strain[1] - self.plastic_strain[0])
        y = (lr - self.log_rate[0]) / (self.log_rate[1] - self.log_rate[0])
        i = np.minimum(x.astype(int), self.plastic_strain.size - 2)
        j = np.minimum(y.astype(int), self.log_rate.size - 2)
        fx, fy = x - i, y - j
        s = self.stress
        return ((s[i, j] * (1 - fx) + s[i + 1, j] * fx) * (1 - fy)
                + (s[i, j + 1] * (1 - fx) + s[i + 1, j + 1] * fx) * fy)

    def scaled(self, factor: float) -> "FlowTable":
        """The same law with every flow stress times ``factor`` (a band of the estimate's uncertainty)."""
        return FlowTable(self.plastic_strain, self.log_rate, self.stress * float(factor))


def flow_table(law, *, max_strain=0.95, strain_points=400, rates=(1e-3, 1e7), rate_points=31) -> FlowTable:
    """Tabulate ``law.flow_stress(plastic_strain, strain_rate)`` [Pa] on a strain by log-rate grid.

    Parameters
    ----------
    law : object
        A law with ``flow_stress`` (the simulator's laws, :mod:`shpb.simulate`).
    max_strain : float
        Last plastic strain of the grid [1].
    strain_points, rate_points : int
        Grid sizes.
    rates : (float, float)
        Lowest and highest strain rate of the grid [1/s] (log-spaced).
    """
    e = np.linspace(0.0, max_strain, int(strain_points))
    lr = np.linspace(math.log(rates[0]), math.log(rates[1]), int(rate_points))
    E, R = np.meshgrid(e, np.exp(lr), indexing="ij")
    s = np.asarray(law.flow_stress(E.ravel(), R.ravel()), dtype=float).reshape(E.shape)
    if not np.all(np.isfinite(s)) or np.any(s < 0):
        raise InputError("the flow-stress law gives a negative or non-finite stress on the planning grid",
                         "law")
    s.setflags(write=False)
    return FlowTable(e, lr, s)


@dataclass(frozen=True, eq=False)
class DiscResponse:
    """What a plastic disc between two rods does (:func:`disc_between_rods`).

    Attributes
    ----------
    time : ndarray
        [s], from the first contact.
    force : ndarray
        Force the disc carries [N], compression positive.
    plastic_strain : ndarray
        Engineering plastic strain of the disc [1].
    plastic_rate : ndarray
        Its rate [1/s].
    """

    time: np.ndarray
    force: np.ndarray
    plastic_strain: np.ndarray
    plastic_rate: np.ndarray


def disc_between_rods(drive, thickness, area, table: FlowTable, compliance, dt, *, feedback=None,
                      max_steps=None, strain_limit=None) -> DiscResponse:
    """A rigid-plastic disc pressed between two elastic rods, marched in time.

    The disc has no inertia and no elastic strain; its force is
    ``F = A sigma(e_p, de_p/dt)``. While it flows, its faces close at
    ``h de_p/dt = V(t) - F C``, where ``V`` is the closing speed the two rod
    faces would have with no force between them (the drive) and
    ``C = 1/Z_1 + 1/Z_2`` the sum of the rods' compliances (``Z = rho c0 A``;
    each rod face moves by ``F / Z`` under a force F, Graff 1975, ch. 2). When
    the drive cannot make it flow, the disc is rigid: ``F = V / C``, or zero
    once the faces separate. This is the pulse-shaper model of Frew,
    Forrestal & Chen (2002) (striker, shaper and incident bar) and, with the
    incident wave as the drive (``V = 2 c_i eps_i``), the classic
    equilibrium analysis of a specimen between the bars (Kolsky 1949).

    Parameters
    ----------
    drive : float or array_like
        Free closing speed V [m/s], one value per step (a constant for a
        striker, whose own reflections enter through ``feedback``).
    thickness : float
        Disc thickness h [m].
    area : float
        Disc area A [m^2] (the flow stress is engineering: force over this area).
    table : FlowTable
        Engineering flow stress of the disc.
    compliance : float
        C = 1/Z_1 + 1/Z_2 [s/kg].
    dt : float
        Time step [s].
    feedback : (int, float), optional
        ``(period, gain)``: the drive at step j is lowered by
        ``gain * sum_k F[j - k period]`` (k >= 1): the echoes of a striker
        with a free rear end, ``gain = 2 / Z_s``, ``period = 2 L / c0``.
    max_steps : int, optional
        Steps for a constant drive (required then); an array drive sets its own.
    strain_limit : float, optional
        Largest plastic strain allowed; AnalysisError beyond it (default: the table's end).

    Returns
    -------
    DiscResponse
        With a constant drive the march stops once the force has come back
        to zero and the drive has fallen to zero or below (the striker has
        separated for good).

    References
    ----------
    .. [1] D. J. Frew, M. J. Forrestal, W. Chen, Exp. Mech. 42 (2002) 93-106.
    .. [2] K. F. Graff, Wave Motion in Elastic Solids, 1975, ch. 2.
    .. [3] H. Kolsky, Proc. Phys. Soc. B 62 (1949) 676-700.
    """
    constant = np.ndim(drive) == 0
    if constant:
        if max_steps is None:
            raise InputError("a constant drive needs max_steps", "disc_between_rods")
        v_const, n = float(drive), int(max_steps)
        v_list = None
    else:
        v_list = np.asarray(drive, dtype=float).tolist()
        n = len(v_list)
    h, dt, comp, area = float(thickness), float(dt), float(compliance), float(area)
    de = float(table.plastic_strain[1] - table.plastic_strain[0])
    ne = table.plastic_strain.size - 2
    lr0 = float(table.log_rate[0])
    dl = float(table.log_rate[1] - table.log_rate[0])
    nl = table.log_rate.size - 1
    rows, first = table.rows, table.first_column  # flow stress [Pa] per (strain, log-rate) node, as lists
    rate_free = table.rate_free
    limit = float(table.plastic_strain[-1] if strain_limit is None else strain_limit)
    period, gain = feedback if feedback is not None else (0, 0.0)
    period = int(period)
    force, strain, rate = [0.0] * n, [0.0] * n, [0.0] * n
    ep, r_prev, peak, last = 0.0, 0.0, 0.0, n
    for j in range(n):
        v = v_const if constant else v_list[j]
        if period > 0:
            k = j - period
            while k >= 0:  # echoes of the striker's free end
                v -= gain * force[k]
                k -= period
        # flow force at the present plastic strain and the last step's rate (the rate term lags one step)
        x = ep / de
        i = int(x)
        if i > ne:
            i = ne
        fx = x - i
        if rate_free:
            f_flow = area * (first[i] + fx * (first[i + 1] - first[i]))
        else:
            y = (math.log(r_prev) - lr0) / dl if r_prev > 0.0 else 0.0
            y = 0.0 if y < 0.0 else (nl - 1e-9 if y > nl - 1e-9 else y)
            m = int(y)
            fy = y - m
            a, b = rows[i], rows[i + 1]
            f_flow = area * ((a[m] * (1 - fx) + b[m] * fx) * (1 - fy) + (a[m + 1] * (1 - fx) + b[m + 1] * fx) * fy)
        strain[j] = ep  # at the start of the step, with the force of the step
        if v - f_flow * comp > 0.0:  # the drive overcomes the flow force: the disc flows
            f = f_flow
            r = (v - f * comp) / h
            ep += r * dt
            if ep > limit:
                raise AnalysisError(f"the disc is crushed beyond an engineering strain of {limit:.2f}")
            r_prev = r
        else:  # rigid: the rods move together through it, or apart
            f = v / comp if v > 0.0 else 0.0
            r = 0.0
        force[j] = f
        rate[j] = r
        if f > peak:
            peak = f
        elif constant and f == 0.0 and peak > 0.0 and v <= 0.0:
            last = j + 1
            break
    t = np.arange(last) * dt
    return DiscResponse(t, np.array(force[:last]), np.array(strain[:last]), np.array(rate[:last]))


def shaper_pulse(striker_speed, striker: RodSpec, bar: RodSpec, shaper: Optional[RodSpec] = None,
                 table: Optional[FlowTable] = None, *, dt=MODEL_STEP, max_time=2e-3) -> DiscResponse:
    """The force a striker sends into the incident bar through a plastic pulse shaper (Frew et al. 2002).

    The striker and the bar are elastic; the shaper is a rigid-plastic disc
    (:func:`disc_between_rods`): its force rises with its flow stress as it
    is crushed (a ramp), and stops rising when the striker's rear-end echo
    slows the striker face. Without a shaper the striker hits the bar
    directly: ``eps = (v / c_b) Z_s / (Z_s + Z_b)`` for ``2 L / c0``, then
    steps of ratio ``(Z_s - Z_b) / (Z_s + Z_b)`` for a heavier striker
    (Graff 1975, ch. 2).

    Parameters
    ----------
    striker_speed : float
        Impact speed V0 [m/s].
    striker, bar : RodSpec
        Elastic striker and incident bar.
    shaper : RodSpec, optional
        Shaper disc: thickness as ``length``, its ``diameter`` (the flow
        stress comes from ``table``).
    table : FlowTable, optional
        Engineering flow stress of the shaper (required with a shaper).
    dt : float
        Model step [s].
    max_time : float
        Longest pulse followed [s].

    Returns
    -------
    DiscResponse
        ``force`` is the force entering the bar [N]; the incident strain is
        ``force / (E_b A_b)``; ``plastic_strain`` the shaper's (zero without one).

    References
    ----------
    .. [1] D. J. Frew, M. J. Forrestal, W. Chen, Exp. Mech. 42 (2002) 93-106
       (model as recalled: no disc inertia or elasticity, force = area x flow
       stress, area growing at constant volume; from memory).
    .. [2] K. F. Graff, Wave Motion in Elastic Solids, 1975, ch. 2.
    """
    comp = 1.0 / striker.impedance + 1.0 / bar.impedance
    period = max(1, int(round(2.0 * striker.length / striker.wave_speed / dt)))
    feedback = (period, 2.0 / striker.impedance)
    steps = int(math.ceil(max_time / dt))
    if shaper is None:  # a disc that never flows: the rods in direct contact
        rigid = FlowTable(np.array([0.0, 1.0]), np.array([0.0, 1.0]), np.full((2, 2), 1e30))  # never flows
        return disc_between_rods(float(striker_speed), 1.0, 1.0, rigid, comp, dt, feedback=feedback,
                                 max_steps=steps)
    if table is None:
        raise InputError("a shaper needs its flow-stress table", "shaper")
    return disc_between_rods(float(striker_speed), shaper.length, shaper.area, table, comp, dt, feedback=feedback,
                             max_steps=steps, strain_limit=min(SHAPER_STRAIN_LIMIT, table.plastic_strain[-1]))


def specimen_response(time, strain_incident, specimen: RodSpec, table: FlowTable, incident: RodSpec,
                      transmitted: Optional[RodSpec] = None) -> dict:
    """Strain rate, strain, stress and face-force balance of a specimen under an incident pulse (Kolsky 1949).

    The specimen is a rigid-plastic disc between the bars
    (:func:`disc_between_rods`) driven by ``2 c_i eps_i`` (the speed the
    incident bar's face would have if free); its reported strain adds the
    elastic part ``sigma / E`` to the plastic strain, as a reduction's does.
    No wave transits: the specimen deforms uniformly. Its faces then differ
    in force by what accelerates its mass (momentum balance of a linear
    velocity field): ``F1 - F2 = rho A L (a2 + L d2e/dt2 / 2)``, with
    ``a2`` the acceleration of the transmitted bar's face, ``dF/dt / Z_t``;
    this is the axial inertia of Davies & Hunter (1963). Deformation is
    uniform only over times longer than a wave transit of the specimen, so
    the acceleration is averaged over one transit. ``R = 2 (F1 - F2)
    / (F1 + F2)`` is the ratio the reduction's equilibrium test reads.

    Parameters
    ----------
    time : array_like
        Uniform time [s].
    strain_incident : array_like
        Incident wave arriving at the specimen [1], compression positive.
    specimen : RodSpec
        Length, diameter, modulus and density of the specimen.
    table : FlowTable
        Its engineering flow stress.
    incident, transmitted : RodSpec
        The bars (transmitted defaults to the incident bar).

    Returns
    -------
    dict of ndarray
        ``time`` [s], ``strain_rate`` [1/s], ``strain`` [1], ``stress`` [Pa]
        (engineering), ``force`` [N] (mean of the faces), ``equilibrium_ratio``
        R [1] (NaN where the force is below 5 % of its peak, as the
        reduction's), ``strain_transmitted`` [1].

    References
    ----------
    .. [1] H. Kolsky, Proc. Phys. Soc. B 62 (1949) 676-700.
    .. [2] E. D. H. Davies, S. C. Hunter, J. Mech. Phys. Solids 11 (1963) 155-179.
    """
    from .kolsky import equilibrium_ratio
    from .validity import moving_average

    transmitted = transmitted or incident
    t = np.asarray(time, dtype=float)
    dt = float(t[1] - t[0])
    comp = 1.0 / incident.impedance + 1.0 / transmitted.impedance
    drive = 2.0 * incident.wave_speed * np.asarray(strain_incident, dtype=float)
    disc = disc_between_rods(drive, specimen.length, specimen.area, table, comp, dt)
    stress = disc.force / specimen.area
    strain = disc.plastic_strain + stress / specimen.modulus
    rate = np.gradient(strain, dt)
    # uniform deformation holds only on times longer than a wave transit of the specimen, which filters
    # faster changes of the drive (the ripples of a dispersed pulse): the acceleration is averaged over one
    transit = max(specimen.length / specimen.wave_speed, dt)
    accel = moving_average(np.gradient(disc.force, dt) / transmitted.impedance
                           + 0.5 * specimen.length * np.gradient(rate, dt), max(1, int(round(transit / dt))))
    gap = specimen.density * specimen.area * specimen.length * accel  # F1 - F2
    front, back = disc.force + 0.5 * gap, disc.force - 0.5 * gap
    ratio = equilibrium_ratio(front, back, floor=0.05 * max(float(np.max(disc.force)), 1e-30))
    return {"time": t, "strain_rate": rate, "strain": strain, "stress": stress, "force": disc.force,
            "equilibrium_ratio": ratio, "strain_transmitted": back / (transmitted.modulus * transmitted.area)}


def pulse_timing(time, strain) -> dict:
    """Foot, 10-90 % rise time and duration of a positive pulse [s].

    The foot is the first sample above 1 % of the peak; the duration runs
    from the foot to where the pulse falls below 5 % of its peak after it
    (:func:`shpb.pulses.pulse_end`, the rule the reduction measures a pulse
    with).
    """
    from .pulses import pulse_end

    t, s = np.asarray(time, dtype=float), np.asarray(strain, dtype=float)
    peak = float(np.max(s))
    if not peak > 0:
        raise AnalysisError("no pulse (the strain never rises above zero)")
    foot = int(np.argmax(s > 0.01 * peak))
    end = pulse_end(s, foot, fraction=0.05)
    end = s.size - 1 if end is None else end
    ipk = foot + int(np.argmax(s[foot:end + 1]))
    i10 = foot + int(np.argmax(s[foot:] >= 0.1 * peak))
    i90 = foot + int(np.argmax(s[foot:] >= 0.9 * peak))
    dt = float(t[1] - t[0])
    return {"foot_s": float(t[foot]), "rise_time_s": max(float(t[i90] - t[i10]), 0.0),
            "duration_s": float(t[end] - t[foot]), "peak": peak, "peak_time_s": float(t[ipk]), "dt_s": dt}


# =========================================================================== record, window, dispersion
@dataclass(frozen=True)
class Rig:
    """The bars as the planning models see them (SI).

    Attributes
    ----------
    incident, transmitted : RodSpec
        Model bars (modulus, density from the bar set's wave speed, diameter, length).
    incident_gauge_distance, transmitted_gauge_distance : float
        Gauge stations from the specimen faces [m].
    incident_poisson_ratio : float
        [1] (dispersion).
    yield_strength : float or None
        The lower of the incident bar's and the striker's yield strengths [Pa].
    striker : RodSpec
        The striker's material and diameter; its length is the bar set's (or 0.3 m), a placeholder: the plan
        chooses the length among the lab's strikers.
    """

    incident: RodSpec
    transmitted: RodSpec
    incident_gauge_distance: float
    transmitted_gauge_distance: float
    incident_poisson_ratio: float
    yield_strength: Optional[float]
    striker: RodSpec

    @classmethod
    def from_barset(cls, barset, striker_diameter=None) -> "Rig":
        """The rig of a :class:`shpb.setup.BarSet` (model bars as a virtual shot's, :func:`shpb.simulate.bar_rod`);
        the striker of the bar set's striker (or incident bar's) material."""
        st = barset.striker
        mat = st.material if st is not None else barset.incident.material
        diameter = striker_diameter or (st.diameter if st is not None else barset.incident.diameter)
        yields = [y for y in (barset.incident.material.yield_strength, mat.yield_strength) if y]
        return cls(bar_rod(barset.incident), bar_rod(barset.transmitted), barset.incident_gauge.distance,
                   barset.transmitted_gauge.distance, barset.incident.poisson_ratio,
                   min(yields) if yields else None,
                   RodSpec(st.length if st is not None else 0.3, diameter, mat.modulus, mat.density))


def window_check(duration: float, rig: Rig, dt: float) -> dict:
    """Does a pulse of this duration fit between the gauges, by the reduction's own rules?

    Three rules, all the reduction's: the incident and reflected waves do
    not overlap at the incident gauge (:func:`shpb.validity.overlap_flag`);
    the far-end echo of the transmitted bar does not reach its gauge during
    the pulse (the ``transmitted_overlap`` rule of
    :func:`shpb.validity.bar_flags`); and the automatic analysis window of
    :func:`shpb.pulses.plan_window` holds the pulse with its lead and its
    end taper (:func:`shpb.pulses.ramp_time`).

    Returns
    -------
    dict
        ``fits`` (all three), ``overlap_free``, ``echo_free``,
        ``window_holds_pulse``, ``window_length_s``, ``lead_s``, ``taper_s``,
        ``overlap_limit_s`` (2 d_i / c_i), ``echo_limit_s`` (2 (L_t - d_t) / c_t).
    """
    from .pulses import plan_window, ramp_time
    from .validity import overlap_flag

    bi, bt = rig.incident, rig.transmitted
    di, dtr = rig.incident_gauge_distance, rig.transmitted_gauge_distance
    plan = plan_window(0.0, duration, dt, -1.0, 1.0, incident_gauge_distance=di, incident_wave_speed=bi.wave_speed,
                       incident_length=bi.length, transmitted_gauge_distance=dtr,
                       transmitted_wave_speed=bt.wave_speed, transmitted_length=bt.length)
    taper = ramp_time(duration, dt)
    echo = 2.0 * (bt.length - dtr) / bt.wave_speed
    out = {"overlap_free": overlap_flag(duration, di, bi.wave_speed, "incident") is None,
           "echo_free": duration <= echo,
           "window_holds_pulse": plan.length >= duration + taper,
           "window_length_s": plan.length, "lead_s": plan.lead, "taper_s": taper,
           "overlap_limit_s": 2.0 * di / bi.wave_speed, "echo_limit_s": echo}
    out["fits"] = out["overlap_free"] and out["echo_free"] and out["window_holds_pulse"]
    return out


def record_needs(duration: float, rig: Rig, dt: float, *, pre_trigger=50e-6, specimen_transit=0.0) -> dict:
    """Record length [s] that holds the reduction's whole window, triggered on the incident gauge.

    The reduction's automatic window (:func:`shpb.pulses.plan_window`) is
    cut short if the record ends before its last wave has passed its gauge
    with the end tapers; the record must therefore run from the trigger to
    ``d_i / c_i`` (foot at the front face) + the window + the longer of the
    reflected and transmitted travel times + two tapers, plus the
    specimen's transit and a 5 % margin.

    Returns
    -------
    dict
        ``record_length_s`` (pre-trigger included), ``pre_trigger_s``,
        ``window_length_s``.
    """
    from .pulses import plan_window, ramp_time

    bi, bt = rig.incident, rig.transmitted
    di, dtr = rig.incident_gauge_distance, rig.transmitted_gauge_distance
    plan = plan_window(0.0, duration, dt, -1.0, 1.0, incident_gauge_distance=di, incident_wave_speed=bi.wave_speed,
                       incident_length=bi.length, transmitted_gauge_distance=dtr,
                       transmitted_wave_speed=bt.wave_speed, transmitted_length=bt.length)
    after = di / bi.wave_speed + plan.length + max(di / bi.wave_speed, dtr / bt.wave_speed) \
        + 2.0 * ramp_time(duration, dt) + specimen_transit
    return {"record_length_s": pre_trigger + 1.05 * after, "pre_trigger_s": pre_trigger,
            "window_length_s": plan.length}


def sample_rate_needed(rise_time: float, duration: float, specimen_transit: float,
                       rates=STANDARD_SAMPLE_RATES) -> dict:
    """The lowest standard sample rate [Hz] that resolves the pulse and the specimen (common practice).

    Rules: at least 5 samples per specimen transit (so the ring-up to
    equilibrium, some four transits, spans 20 samples), 25 samples across
    the pulse's 10-90 % rise, and 500 samples over the pulse.

    Returns
    -------
    dict
        ``sample_rate_Hz`` (the chosen standard rate; the highest offered if
        none suffices), ``needed_Hz`` and ``reason`` (the rule that set it).
    """
    needs = {"5 samples per specimen transit": 5.0 / specimen_transit if specimen_transit > 0 else 0.0,
             "25 samples across the rise": 25.0 / rise_time if rise_time > 0 else 0.0,
             "500 samples over the pulse": 500.0 / duration}
    reason, needed = max(needs.items(), key=lambda kv: kv[1])
    offered = sorted(rates)
    chosen = next((r for r in offered if r >= needed * (1 - 1e-9)), offered[-1])
    return {"sample_rate_Hz": chosen, "needed_Hz": needed, "reason": reason}


def dispersion_severity(rise_time: float, bar_radius: float, bar_wave_speed: float, poisson_ratio: float,
                        distance: float) -> dict:
    """How much Pochhammer–Chree dispersion will reshape the pulse between the specimen and the gauge.

    The pulse's rise carries frequencies up to about ``f = 0.35 / t_rise``
    (the bandwidth of a 10-90 % rise, common practice). At that frequency
    the phase velocity ``c(f)`` of the fundamental mode (:mod:`shpb.dispersion`,
    Bancroft 1941) lags c0, and over the gauge distance the rise's highest
    harmonics arrive ``d (1/c - 1/c0)`` late. This tool calls the effect
    *low* below a tenth of the rise, *moderate* up to half of it and *high*
    above (its own rule of thumb): high means ripples on the plateau that
    only the dispersion correction, or a slower rise (a shaper), removes.

    Parameters
    ----------
    rise_time : float
        10-90 % rise of the incident pulse [s]; 0 for a step (an unshaped
        impact: the front is then as sharp as dispersion lets it be).
    bar_radius, bar_wave_speed, poisson_ratio : float
        The bar [m, m/s, 1].
    distance : float
        Gauge distance from the specimen face [m].

    Returns
    -------
    dict
        ``frequency_Hz``, ``a_over_wavelength``, ``phase_velocity_ratio``,
        ``delay_s`` (the lag over ``distance``), ``delay_over_rise``,
        ``severity`` (low / moderate / high), ``second_mode_onset_Hz``.

    References
    ----------
    .. [1] D. Bancroft, Phys. Rev. 59 (1941) 588-593.
    .. [2] P. S. Follansbee, C. Frantz, J. Eng. Mater. Technol. 105 (1983) 61-66.
    """
    from .dispersion import phase_velocity, second_mode_onset

    a, c0 = float(bar_radius), float(bar_wave_speed)
    onset = second_mode_onset(a, c0, poisson_ratio)
    if rise_time <= 0:
        return {"frequency_Hz": math.inf, "a_over_wavelength": math.inf, "phase_velocity_ratio": math.nan,
                "delay_s": math.inf, "delay_over_rise": math.inf, "severity": "high", "second_mode_onset_Hz": onset}
    f = 0.35 / rise_time
    c = float(phase_velocity(f, a, c0, poisson_ratio))
    delay = distance * (1.0 / c - 1.0 / c0)
    ratio = delay / rise_time
    severity = "low" if ratio < 0.1 else ("moderate" if ratio <= 0.5 else "high")
    return {"frequency_Hz": f, "a_over_wavelength": f * a / c, "phase_velocity_ratio": c / c0, "delay_s": delay,
            "delay_over_rise": ratio, "severity": severity, "second_mode_onset_Hz": onset}


# =========================================================================== the design
@dataclass(frozen=True, eq=False)
class MaterialEstimate:
    """What the lab expects of a specimen material (SI).

    Attributes
    ----------
    name : str
    modulus, density, poisson_ratio : float
        [Pa], [kg/m^3], [1].
    law : object
        Flow-stress law in the simulator's form (``flow_stress(plastic_strain,
        strain_rate) -> engineering stress [Pa]``; :mod:`shpb.simulate`).
    law_description : dict
        The law as the plan file gave it (for the files written).
    uncertainty : float
        Relative uncertainty of the flow stress [1] (the plan gives the rate
        and strain at ``1 -/+ uncertainty`` times the flow stress).
    temperature : float or None
        Test temperature [K] (copied to the shots table; the models are isothermal).
    """

    name: str
    modulus: float
    density: float
    poisson_ratio: float
    law: object
    law_description: dict = field(default_factory=dict)
    uncertainty: float = 0.0
    temperature: Optional[float] = None


@dataclass(frozen=True, eq=False)
class ShaperStock:
    """A pulse-shaper material the lab holds: its law and the discs it can cut (SI).

    Attributes
    ----------
    name : str
    modulus, density : float
        [Pa], [kg/m^3].
    law : object
        Plastic flow-stress law (simulator form, engineering stress).
    law_description : dict
    diameters : tuple of float
        Disc diameters it can cut [m].
    thickness_range : (float, float)
        Thinnest and thickest disc [m] (the plan rounds to 0.01 mm).
    """

    name: str
    modulus: float
    density: float
    law: object
    law_description: dict = field(default_factory=dict)
    diameters: tuple = ()
    thickness_range: tuple = (0.2e-3, 2.0e-3)


@dataclass(frozen=True, eq=False)
class Constraints:
    """What the lab owns and allows (SI).

    Attributes
    ----------
    strikers : tuple of float
        Striker lengths owned [m] (material and diameter: the rig's striker).
    speed_range : (float, float)
        Slowest and fastest striker speed of the gun [m/s].
    specimen_diameters : tuple of float
        Stock diameters specimens can be cut from [m].
    shapers : tuple of ShaperStock
        Shaper materials; empty: shots without a shaper.
    bar_stress_limit : float
        Largest planned bar stress as a fraction of the yield strength [1]
        (a margin below yield).
    sample_rates : tuple of float
        Sample rates the recorder offers [Hz].
    strain_tolerance : float
        Relative strain error a design accepts before it trades rate
        constancy for strain [1].
    strain_noise : float
        Rms noise of a recorded bar strain [1] (a few microstrain is common
        practice; :mod:`shpb.planning` takes it from the preview's recorder
        and the bar set's bridges): the reduction's R(t) carries it.
    """

    strikers: tuple
    speed_range: tuple
    specimen_diameters: tuple
    shapers: tuple = ()
    bar_stress_limit: float = 0.8
    sample_rates: tuple = STANDARD_SAMPLE_RATES
    strain_tolerance: float = 0.07
    strain_noise: float = 2e-6


@dataclass(frozen=True)
class Target:
    """One planned test: a material at a strain rate [1/s] to a strain [1] (temperature [K] or None)."""

    material: str
    strain_rate: float
    strain: float
    temperature: Optional[float] = None


@dataclass(frozen=True, eq=False)
class Prediction:
    """The planning models' forecast of one shot (:func:`predict_shot`).

    Attributes
    ----------
    time : ndarray
        [s] from the incident foot at the specimen.
    strain_incident, strain_rate, strain, stress : ndarray
        Incident wave at the specimen (dispersed over the incident bar) [1],
        specimen engineering rate [1/s], strain [1] and stress [Pa].
    mean_rate : float
        Mean strain rate over the forecast's valid part [1/s]: the loading
        part (:func:`shpb.validity.loading_region`) from where the forecast's
        |R| keeps within :data:`EQUILIBRIUM_MARGIN` of the reduction's
        threshold (else from the reduction's own onset), not before
        :data:`TRANSITS_FOR_EQUILIBRIUM` specimen transits.
    rate_cv : float
        Its coefficient of variation [1].
    final_strain : float
        Largest specimen strain [1].
    timing : dict
        :func:`pulse_timing` of the incident pulse at the impact face (the shaper's pulse).
    shaper_strain : float
        Final engineering strain of the shaper [1] (0 without one).
    equilibrium_ratio : ndarray
        R(t) of the forecast [1] (:func:`specimen_response`).
    in_equilibrium : bool
        The reduction's equilibrium test passes on the forecast.
    valid_span : (float, float)
        Times [s] between which the mean rate was taken (NaN without loading).
    valid_fraction : float
        Fraction of the loading part in equilibrium [1] (the reduction warns below 0.5).
    margin_fraction : float
        The same with the threshold times :data:`EQUILIBRIUM_MARGIN` [1]: what a design relies on.
    arrival_duration : float
        Duration of the dispersed pulse at the specimen [s], by the reduction's 5 % rule: what the
        reduction will measure (longer than the impact-face pulse by its dispersed tail).
    loading_cv : float
        Coefficient of variation of the rate over the whole loading part after
        the ring-up [1]: how flat the pulse keeps the rate, whichever part a
        reduction finds valid.
    """

    time: np.ndarray
    strain_incident: np.ndarray
    strain_rate: np.ndarray
    strain: np.ndarray
    stress: np.ndarray
    mean_rate: float
    rate_cv: float
    final_strain: float
    timing: dict
    shaper_strain: float
    equilibrium_ratio: Optional[np.ndarray] = None
    in_equilibrium: bool = True
    valid_span: tuple = (math.nan, math.nan)
    loading_cv: float = math.nan
    valid_fraction: float = 0.0
    margin_fraction: float = 0.0
    arrival_duration: float = math.nan

    def mean_rate_over(self, start: float, stop: float) -> float:
        """Mean forecast strain rate between two times [s] (NaN if none falls between them) [1/s]."""
        inside = (self.time >= start) & (self.time <= stop)
        return float(np.mean(self.strain_rate[inside])) if inside.any() else math.nan


def predict_shot(rig: Rig, specimen: RodSpec, table: FlowTable, striker: RodSpec, speed: float,
                 shaper: Optional[RodSpec] = None, shaper_table: Optional[FlowTable] = None, *,
                 dt=MODEL_STEP, strain_noise=0.0) -> Prediction:
    """Forecast a shot with the planning models: the shaped incident pulse, then the specimen, judged as a reduction would.

    The pulse at the impact face (:func:`shaper_pulse`) reaches the specimen
    with the Pochhammer–Chree dispersion of the incident bar's length
    (:func:`shpb.simulate.excess_dispersion`, as a virtual shot drives its
    specimen) and no damping; the specimen answers as
    :func:`specimen_response`. The forecast is then judged by the
    reduction's own rules (:mod:`shpb.validity`): the loading part
    (:func:`~shpb.validity.loading_region`), force equilibrium from where
    |R| stays within :data:`~shpb.validity.EQUILIBRIUM_THRESHOLD`
    (:func:`~shpb.validity.equilibrium_onset`), but not before
    :data:`TRANSITS_FOR_EQUILIBRIUM` specimen transits (the ring-up the
    models do not resolve); the mean rate (:func:`~shpb.validity.rate_plateau`)
    over the part where |R| keeps within :data:`EQUILIBRIUM_MARGIN` of the
    threshold (or from the reduction's own onset, or without equilibrium
    from the ring-up). A recorded R also carries the records' noise: with
    ``strain_noise`` [1] on each bar strain, about ``sqrt(3) noise / eps_t``
    (three waves, uncorrelated; common practice), and three times that is
    added to |R| for the margin (a small transmitted pulse leaves the
    reduction's equilibrium test to chance).
    """
    from .simulate import excess_dispersion
    from .validity import EQUILIBRIUM_THRESHOLD, equilibrium_onset, loading_region, rate_plateau

    pulse = shaper_pulse(speed, striker, rig.incident, shaper, shaper_table, dt=dt)
    lead, tail = int(20e-6 / dt), int(50e-6 / dt)  # room for the dispersed front, and for the unloading
    at_impact = np.concatenate([np.zeros(lead), pulse.force / (rig.incident.modulus * rig.incident.area),
                                np.zeros(tail)])
    t = (np.arange(at_impact.size) - lead) * dt  # t = 0: the foot reaches the specimen
    # the pulse reaches the specimen dispersed over the incident bar's length (Follansbee & Frantz 1983), as
    # in a virtual shot (shpb.simulate.dispersed_drive): its fronts are rounded, its plateau rippled
    eps_i = excess_dispersion(at_impact, dt, rig.incident.length, 0.5 * rig.incident.diameter,
                              rig.incident.wave_speed, rig.incident_poisson_ratio)
    resp = specimen_response(t, eps_i, specimen, table, rig.incident, rig.transmitted)
    rate, ratio = resp["strain_rate"], resp["equilibrium_ratio"]
    # the loading ends with the pulse: the models' rigid specimen would ring to the ripples that trail it
    transit = specimen.length / specimen.wave_speed
    arrival = pulse_timing(t, np.maximum(eps_i, 0.0))
    stop = min(rate.size, int(round((arrival["foot_s"] + arrival["duration_s"] + 2 * transit - t[0]) / dt)))
    region = loading_region(rate[:stop], resp["force"][:stop])
    mean, cv, onset, span, flat, fraction, margin = 0.0, math.nan, None, (math.nan, math.nan), math.nan, 0.0, 0.0
    if region is not None:
        ring_up = min(region[0] + int(math.ceil(TRANSITS_FOR_EQUILIBRIUM * transit / dt)), region[1] - 1)
        onset = equilibrium_onset(ratio, region, EQUILIBRIUM_THRESHOLD)
        eps_t = np.maximum(np.abs(resp["strain_transmitted"]), 1e-30)
        noisy = np.abs(ratio) + 3.0 * math.sqrt(3.0) * strain_noise / eps_t  # NaN stays NaN (no force)
        strict = equilibrium_onset(noisy, region, EQUILIBRIUM_MARGIN * EQUILIBRIUM_THRESHOLD)
        length = max(region[1] - region[0], 1)
        if onset is not None:
            fraction = (region[1] - max(ring_up, onset)) / length
        # the rate is averaged from where the forecast keeps its margin on equilibrium (the reduction's R runs
        # higher than the models' during a ramp), or from the reduction's own onset without it
        first = max(ring_up, strict if strict is not None else (onset if onset is not None else 0))
        if strict is not None:
            margin = (region[1] - first) / length
        mask = np.zeros(rate.size, dtype=bool)
        mask[first:region[1]] = True
        span = (float(t[first]), float(t[region[1] - 1]))
        plateau = rate_plateau(rate, mask)
        mean, cv = plateau["mean_per_s"], plateau["cv"]
        mask[ring_up:region[1]] = True
        flat = rate_plateau(rate, mask)["cv"]
    return Prediction(t, eps_i, rate, resp["strain"], resp["stress"], float(mean), float(cv),
                      float(np.max(resp["strain"])), pulse_timing(t[lead:] - t[lead], at_impact[lead:]),
                      float(pulse.plastic_strain[-1]) if shaper is not None else 0.0,
                      equilibrium_ratio=ratio, in_equilibrium=onset is not None, valid_span=span,
                      loading_cv=float(flat), valid_fraction=float(fraction), margin_fraction=float(margin),
                      arrival_duration=arrival["duration_s"])


@dataclass(frozen=True, eq=False)
class ShotDesign:
    """A planned shot: settings, reasons, forecasts, record and safety numbers (SI).

    Attributes
    ----------
    target : Target
    material : MaterialEstimate
    spec : shpb.simulate.VirtualShotSpec
        The virtual shot of the design: striker (length) and its speed,
        shaper (thickness as its length) or None, bars, specimen with the
        material's law, gauge stations, record length and sample rate.
    shaper_stock : str or None
        Name of the shaper material.
    prediction : Prediction
        The models' forecast at the nominal flow stress.
    band : dict
        ``low``/``high`` -> (mean rate [1/s], final strain [1]) at the flow
        stress times ``1 +/- uncertainty`` (a stronger material gives the
        lower rate); ``rate_range``, ``strain_range``: the smallest and
        largest of those and the nominal forecast.
    specimen : dict
        ``davies_hunter_ratio``, ``length_over_diameter``, ``diameter_after_m``,
        ``transit_s``, ``rise_transits`` (transits of the specimen in the
        pulse's rise), ``inertia_stress_Pa`` (:func:`inertia_stress` at the
        ramp's strain acceleration), ``transmitted_strain_peak``,
        ``forecast_equilibrium_from_s`` and ``forecast_valid_fraction``
        (force equilibrium in the forecast, judged as a reduction judges it).
    reasons : dict
        ``specimen``, ``striker``, ``shaper``: one line each.
    safety : dict
        :func:`shpb.simulate.plan_shot` of the spec (``incident_bar_stress_MPa``,
        the stress of the striker's elastic impact without a shaper; striker
        kinetic energy; its fraction of yield; ``yields``), plus
        ``forecast_peak_bar_stress_MPa`` (the shaped pulse with its dispersion
        ripples), ``peak_fraction_of_yield`` (the larger of the two over the
        yield strength) and ``bar_stress_limit`` (fraction of yield).
    record : dict
        ``sample_rate_Hz`` and its reason, ``record_length_s``,
        ``pre_trigger_s``, ``pulse_duration_s`` (the longer of the shaper's
        pulse and the dispersed pulse at the specimen) and
        :func:`window_check` (``fits``, ...).
    dispersion : dict
        :func:`dispersion_severity` at the incident gauge.
    notes : tuple of str
        What could not be met, and cautions.
    """

    target: Target
    material: MaterialEstimate
    spec: object
    shaper_stock: Optional[str]
    prediction: Prediction
    band: dict
    specimen: dict
    reasons: dict
    safety: dict
    record: dict
    dispersion: dict
    notes: tuple = ()

    @property
    def feasible(self) -> bool:
        """True when the design meets its target within the models and every limit (notes say what does not)."""
        return not self.notes


# --------------------------------------------------------------------------- the search
@dataclass(frozen=True, eq=False)
class _Context:
    """What every trial of one target shares."""

    target: Target
    material: MaterialEstimate
    rig: Rig
    constraints: Constraints
    table: FlowTable
    specimen: RodSpec
    shaper_tables: dict
    aim_rate: float
    aim_strain: float
    rate_span: Optional[tuple] = None

    def rate(self, p: Prediction) -> float:
        """The forecast's mean rate as it is aimed: over ``rate_span`` (the valid part a preview's reduction
        found) when given, else over the forecast's own valid part [1/s]."""
        if self.rate_span is not None:
            value = p.mean_rate_over(*self.rate_span)
            if math.isfinite(value):
                return value
        return p.mean_rate


@dataclass(frozen=True, eq=False)
class _Trial:
    """One forecast setting: striker length, speed, shaper (stock, diameter, thickness), forecast and score."""

    length: float
    speed: float
    stock: Optional[ShaperStock]
    diameter: Optional[float]
    thickness: Optional[float]
    prediction: Optional[Prediction]
    score: float


def _striker(ctx, length):
    return dataclasses.replace(ctx.rig.striker, length=length)


def _forecast(ctx, length, speed, stock, diameter, thickness):
    """One forecast; None when the shaper would be crushed."""
    shaper = None if stock is None else RodSpec(thickness, diameter, stock.modulus, stock.density, stock.law)
    try:
        return predict_shot(ctx.rig, ctx.specimen, ctx.table, _striker(ctx, length), speed, shaper,
                            None if stock is None else ctx.shaper_tables[stock.name],
                            strain_noise=ctx.constraints.strain_noise)
    except AnalysisError:
        return None


def _score(ctx, p, speed):
    """Lower is better: rate or strain off their aims, a rate that is not constant, a rise too short, too short
    an equilibrium; a bar stress above the limit or a pulse that does not fit between the gauges rule a trial out.

    The strain may miss its aim by the constraints' ``strain_tolerance``
    at no cost (the strikers are few); beyond it the miss outweighs any
    gain in rate constancy.
    """
    if p is None or not ctx.rate(p) > 0:
        return math.inf
    c = ctx.constraints
    strain_err = abs(p.final_strain / ctx.aim_strain - 1.0)
    rate_err = abs(ctx.rate(p) / ctx.aim_rate - 1.0)
    transit = ctx.specimen.length / ctx.specimen.wave_speed
    short_rise = max(0.0, 1.0 - p.timing["rise_time_s"] / (TRANSITS_FOR_EQUILIBRIUM * transit))
    score = 10.0 * max(0.0, strain_err - c.strain_tolerance) / c.strain_tolerance \
        + 10.0 * max(0.0, rate_err - 0.01) / 0.02
    score += 3.0 * (p.loading_cv if math.isfinite(p.loading_cv) else 1.0) + 0.5 * short_rise
    if not p.in_equilibrium:  # the reduction would find no valid part
        score += 5.0
    score += 4.0 * max(0.0, MIN_VALID_FRACTION - p.margin_fraction)  # or too short a one
    if ctx.rig.yield_strength and incident_bar_stress(speed, ctx.rig.striker, ctx.rig.incident) \
            > c.bar_stress_limit * ctx.rig.yield_strength:
        score += 100.0
    if not window_check(p.arrival_duration, ctx.rig, MODEL_STEP)["fits"]:  # waves would overlap at a gauge
        score += 100.0
    return score


def _at_speed(ctx, length, stock, diameter, thickness, guess) -> _Trial:
    """The trial whose forecast mean rate is the aim: the striker speed within the gun's range.

    A secant from the guess while the rate moves smoothly with the speed,
    then a bracketing search (Illinois' regula falsi), since the mean over
    the valid part can jump when the part where equilibrium holds changes.
    The best trial found is returned (at a bound of the gun's range when the
    aim lies beyond it).
    """
    lo, hi = ctx.constraints.speed_range
    aim = ctx.aim_rate
    tried = []

    def trial(v):
        p = _forecast(ctx, length, v, stock, diameter, thickness)
        t = _Trial(length, v, stock, diameter, thickness, p, _score(ctx, p, v))
        tried.append(t)
        return t

    def off(t):  # signed relative rate miss; None when the shaper was crushed
        return None if t.prediction is None else ctx.rate(t.prediction) / aim - 1.0

    def done():
        return min(tried, key=lambda x: (math.inf if off(x) is None else abs(off(x)), x.score))

    a = trial(min(max(guess, lo), hi))
    if off(a) is None:
        return a
    b = trial(min(max(a.speed * (1.15 if off(a) < 0 else 0.87), lo), hi))
    for _ in range(3):  # secant
        if off(b) is None or abs(off(b)) <= 0.005 or b.speed == a.speed or off(b) == off(a):
            break
        v = min(max(b.speed - off(b) * (b.speed - a.speed) / (off(b) - off(a)), lo), hi)
        if v == b.speed:
            break
        a, b = b, trial(v)
    if abs(off(done()) if off(done()) is not None else 1.0) <= 0.005:
        return done()
    # bracket the aim among the trials (the rate grows with the speed) and close in
    below = [t for t in tried if off(t) is not None and off(t) < 0]
    above = [t for t in tried if off(t) is not None and off(t) > 0]
    if not below or not above:
        edge = hi if not above else lo
        if all(t.speed != edge for t in tried):
            trial(edge)
        below = [t for t in tried if off(t) is not None and off(t) < 0]
        above = [t for t in tried if off(t) is not None and off(t) > 0]
        if not below or not above:
            return done()
    a, b = max(below, key=lambda t: t.speed), min(above, key=lambda t: t.speed)
    fa, fb, side = off(a), off(b), 0
    for _ in range(6):
        v = (a.speed * fb - b.speed * fa) / (fb - fa)
        c = trial(v)
        fc = off(c)
        if fc is None or abs(fc) <= 0.005:
            break
        if fc < 0:
            a, fa = c, fc
            if side == -1:
                fb *= 0.5
            side = -1
        else:
            b, fb = c, fc
            if side == 1:
                fa *= 0.5
            side = 1
    return done()


def _thicknesses(stock, n=5):
    """``n`` disc thicknesses spread evenly in log over the stock's range, to 0.01 mm [m]."""
    lo, hi = stock.thickness_range
    return sorted({round(h * 1e5) / 1e5 for h in np.geomspace(lo, hi, n)})


def _refine_strain(ctx, best: _Trial) -> _Trial:
    """Bring a shaped trial's strain to its aim by its disc thickness (a secant, each step at its own speed).

    At a given rate the final strain grows with the thickness (a thicker
    disc stretches the pulse); the thickness stays in the stock's range.
    """
    if best.stock is None or best.prediction is None:
        return best
    lo, hi = best.stock.thickness_range
    prev = None
    for _ in range(3):
        err = best.prediction.final_strain / ctx.aim_strain - 1.0
        if abs(err) <= 0.5 * ctx.constraints.strain_tolerance:
            break
        if prev is None or prev.prediction is None or prev.thickness == best.thickness:
            h = best.thickness * (1.5 if err < 0 else 1 / 1.5)  # first step: a fixed ratio
        else:
            de = best.prediction.final_strain - prev.prediction.final_strain
            if de == 0:
                break
            h = best.thickness + (ctx.aim_strain - best.prediction.final_strain) * (best.thickness - prev.thickness) / de
        h = round(min(max(h, lo), hi) * 1e5) / 1e5
        if h == best.thickness:
            break
        nxt = _at_speed(ctx, best.length, best.stock, best.diameter, h, best.speed)
        if nxt.prediction is None:
            break
        prev, best = best, min((best, nxt), key=lambda x: x.score) if nxt.score > best.score else nxt
        if best is prev:
            break
    return best


def _search(ctx, strikers, options, guess) -> list:
    """Every (striker, shaper disc, thickness) trial at the speed that gives the aim rate."""
    trials = []
    for length in strikers:
        for stock, d in options:
            v = guess
            for h in (_thicknesses(stock) if stock is not None else (None,)):
                t = _at_speed(ctx, length, stock, d, h, v)
                trials.append(t)
                if t.prediction is not None:
                    v = t.speed
    return trials


def _specimen_candidates(target, material, rig, constraints, table):
    """Stock diameters, largest first, that stay within the bar face and that the gun and bars can drive, each
    with its Davies & Hunter length; and the reasons others were left out. Returns (list of (RodSpec, reason), notes)."""
    ratio = davies_hunter_ratio(material.poisson_ratio)
    face = min(rig.incident.diameter, rig.transmitted.diameter)
    lo, hi = constraints.speed_range
    limit = constraints.bar_stress_limit * rig.yield_strength if rig.yield_strength else math.inf
    rejected, out = [], []
    for d in sorted(constraints.specimen_diameters, reverse=True):
        grown = diameter_after(d, min(target.strain, 0.95))
        if grown > face:
            rejected.append(f"{d * 1e3:g} mm grows to {grown * 1e3:.1f} mm, beyond the {face * 1e3:g} mm bar face")
            continue
        length = round(ratio * d * 1e5) / 1e5  # to 0.01 mm
        force = float(table(0.5 * target.strain, target.strain_rate)) * math.pi * d * d / 4.0
        eps_i = incident_strain_for_rate(target.strain_rate, length, force, rig.incident, rig.transmitted)
        speed = striker_speed_for_strain(eps_i, rig.striker, rig.incident)
        stress = incident_bar_stress(speed, rig.striker, rig.incident)
        if speed > hi:
            rejected.append(f"{d * 1e3:g} mm needs about {speed:.1f} m/s, above the gun's {hi:g} m/s")
            continue
        if stress > limit:
            rejected.append(f"{d * 1e3:g} mm needs a bar stress of {stress / 1e6:.0f} MPa, above "
                            f"{100 * constraints.bar_stress_limit:.0f} % of yield")
            continue
        reason = (f"{d * 1e3:g} mm: the largest stock that stays within the bar face after the target strain "
                  f"({grown * 1e3:.1f} mm) and that the gun and bars can drive (largest force, strongest "
                  f"transmitted signal); length L = D sqrt(3 nu)/2 = {length * 1e3:.2f} mm (Davies & Hunter "
                  f"1963, nu = {material.poisson_ratio:g}): least inertia error; L/D near 0.5 also keeps friction "
                  f"on lubricated faces small")
        out.append((RodSpec(length, d, material.modulus, material.density, material.law), reason, list(rejected)))
    if out:
        return out, ()
    d = min(constraints.specimen_diameters)
    note = "no stock diameter meets every limit (" + "; ".join(rejected) + f"): planned with {d * 1e3:g} mm"
    return [(RodSpec(round(ratio * d * 1e5) / 1e5, d, material.modulus, material.density, material.law),
             f"{d * 1e3:g} mm, the smallest stock (no diameter meets every limit)", [])], (note,)


def _striker_candidates(target, rig, constraints):
    """The owned strikers whose bare pulse 2 L / c0 brackets the loading time the target needs (strain / rate)."""
    need = target.strain / target.strain_rate
    by_time = sorted(constraints.strikers, key=lambda L: 2.0 * L / rig.striker.wave_speed)
    shorter = [L for L in by_time if 2.0 * L / rig.striker.wave_speed <= need]
    longer = [L for L in by_time if 2.0 * L / rig.striker.wave_speed > need]
    return tuple(([shorter[-1]] if shorter else []) + ([longer[0]] if longer else [])), need


def _speed_guess(ctx, specimen):
    """Striker speed [m/s] of the classic estimate: force balance at the flow stress of half the target strain."""
    rig, target = ctx.rig, ctx.target
    force = float(ctx.table(0.5 * target.strain, target.strain_rate)) * specimen.area
    eps_i = incident_strain_for_rate(ctx.aim_rate, specimen.length, force, rig.incident, rig.transmitted)
    return striker_speed_for_strain(eps_i, rig.striker, rig.incident)


def _meets(ctx, t: _Trial) -> bool:
    """The trial reaches its aims (rate within 2 %, strain within twice the tolerance) in equilibrium, at a rate
    near enough constant (coefficient of variation at most :data:`MAX_LOADING_CV`) and inside every limit."""
    if t.prediction is None:
        return False
    p = t.prediction
    return abs(ctx.rate(p) / ctx.aim_rate - 1) <= 0.02 and p.margin_fraction >= MIN_VALID_FRACTION and \
        abs(p.final_strain / ctx.aim_strain - 1) <= 2 * ctx.constraints.strain_tolerance and t.score < 100 \
        and p.loading_cv <= MAX_LOADING_CV


def design_shot(target: Target, material: MaterialEstimate, rig: Rig, constraints: Constraints, *,
                table: Optional[FlowTable] = None, shaper_tables: Optional[dict] = None,
                ) -> ShotDesign:
    """Choose striker, speed, specimen and shaper for one target, and forecast the shot.

    Parameters
    ----------
    target : Target
    material : MaterialEstimate
    rig : Rig
    constraints : Constraints
    table : FlowTable, optional
        The material's flow table (:func:`flow_table`; built here if not given).
    shaper_tables : dict, optional
        Shaper stock name -> FlowTable (built here if not given).

    Returns
    -------
    ShotDesign
        The settings with their reasons, forecasts, record, dispersion and
        safety numbers; ``notes`` list what could not be met.

    Notes
    -----
    The search: the specimen first (the largest stock diameter within the
    limits, its length by :func:`davies_hunter_ratio`); then, for the owned
    strikers that bracket the loading time the target needs and every
    shaper disc the stock allows (five thicknesses over its range), the
    speed that gives the target mean rate (a secant); the trial whose strain
    is within tolerance of its aim with the most constant rate and a rise of
    at least :data:`TRANSITS_FOR_EQUILIBRIUM` specimen transits wins, and its
    thickness is then refined for the strain. If no trial reaches the
    targets within the gun's range, the next smaller specimen is tried.
    """
    table = table or flow_table(material.law)
    shaper_tables = dict(shaper_tables or {})
    for stock in constraints.shapers:
        if stock.name not in shaper_tables:
            shaper_tables[stock.name] = flow_table(stock.law, max_strain=0.99)
    aims = (target.strain_rate, target.strain)
    candidates, notes = _specimen_candidates(target, material, rig, constraints, table)
    options = [(stock, d) for stock in constraints.shapers for d in stock.diameters] or [(None, None)]
    strikers, need = _striker_candidates(target, rig, constraints)
    tried = []
    for k, (specimen, reason, rejected) in enumerate(candidates):
        ctx = _Context(target, material, rig, constraints, table, specimen, shaper_tables, *aims)
        trials = [t for t in _search(ctx, strikers, options, _speed_guess(ctx, specimen)) if t.prediction is not None]
        if not trials:
            continue
        best = _refine_strain(ctx, min(trials, key=lambda x: x.score))
        if k > 0:
            reason = reason.replace("the largest stock", "the largest stock that can reach the target")
        if rejected:
            reason += "; not " + "; not ".join(rejected)
        tried.append((ctx, best, reason))
        if _meets(ctx, best):
            break
        slower = (f"{specimen.diameter * 1e3:g} mm misses the target (rate, strain, a near-constant rate or force "
                  f"equilibrium) within the gun's range and the shaper stock")
        for later in candidates[k + 1:]:
            later[2].append(slower)
    if not tried:
        raise AnalysisError(f"{material.name} at {target.strain_rate:g} 1/s: every trial crushed the shaper; "
                            f"give thicker or wider shaper stock")
    # the first specimen that meets the target, else the best trial of all
    ctx, best, reason = tried[-1] if _meets(tried[-1][0], tried[-1][1]) else min(tried, key=lambda x: x[1].score)
    return _finish(ctx, best, reason, notes, need)


def adjust_design(design: ShotDesign, reached_rate: float, reached_strain: float, rig: Rig,
                  constraints: Constraints, *, rate_span=None, table: Optional[FlowTable] = None,
                  shaper_tables: Optional[dict] = None, previous=None) -> ShotDesign:
    """One step of the 1-D searches on striker speed and shaper thickness, after a preview missed its target.

    Newton steps whose values come from the preview and whose slopes come
    from the planning models (or, for the speed, from two previews):

    * speed: ``v' = v + (target rate - reached rate) / (d rate / d v)``;
    * thickness, for a shaped shot whose strain would still miss by more
      than twice the strain tolerance after the speed step (a new
      thickness reshapes the pulse, so small misses are left to the speed):
      ``h' = h + (target strain - expected strain) / (d strain / d h)`` at a
      constant rate, and the speed solved again to hold the rate;
    * when the thickness cannot help (no shaper, or the stock's end), the
      speed step that balances the rate and strain misses (both grow with
      the speed), or no step when that gains less than 1 %.

    Striker, specimen and shaper disc diameter are kept; the design is
    returned unchanged when no step helps.

    Parameters
    ----------
    design : ShotDesign
        The design that was previewed.
    reached_rate, reached_strain : float
        What its preview reached: mean rate [1/s] and final strain [1].
    rig : Rig
    constraints : Constraints
    rate_span : (float, float), optional
        Times [s] over which the preview's rate was averaged (its valid
        part); the models' rate is read over the same span. Default: the
        forecast's own valid part.
    table, shaper_tables : optional
        Flow tables (built if not given).
    previous : (float, float, float), optional
        ``(speed, thickness, reached rate)`` of an earlier preview: at the
        same thickness, its secant gives the rate slope.

    Returns
    -------
    ShotDesign
    """
    target, material = design.target, design.material
    table = table or flow_table(material.law)
    shaper_tables = dict(shaper_tables or {})
    for stock in constraints.shapers:
        if stock.name not in shaper_tables:
            shaper_tables[stock.name] = flow_table(stock.law, max_strain=0.99)
    s = design.spec
    span = rate_span if rate_span is not None else design.prediction.valid_span
    ctx = _Context(target, material, rig, constraints, table, s.specimen, shaper_tables, target.strain_rate,
                   target.strain, span)
    stock = next((x for x in constraints.shapers if x.name == design.shaper_stock), None)
    d = None if s.shaper is None else s.shaper.diameter
    h = None if s.shaper is None else s.shaper.length
    length, v = s.striker.length, s.striker_speed
    lo, hi = constraints.speed_range
    base = _forecast(ctx, length, v, stock, d, h)
    step = 0.03 * v
    probe = _forecast(ctx, length, v + step, stock, d, h)
    if probe is None:  # the faster shot crushes the shaper: the slope from a slower one
        step = -step
        probe = _forecast(ctx, length, v + step, stock, d, h)
    if base is None or probe is None:
        return design
    slope_rate = (ctx.rate(probe) - ctx.rate(base)) / step
    slope_strain = (probe.final_strain - base.final_strain) / step
    if previous is not None and previous[1] == h and previous[0] != v:
        secant = (reached_rate - previous[2]) / (v - previous[0])
        if secant > 0:
            slope_rate = secant
    if not slope_rate > 0:
        return design
    R, E, tol = target.strain_rate, target.strain, constraints.strain_tolerance
    v_new = min(max(v + (R - reached_rate) / slope_rate, lo), hi)
    expected = reached_strain + slope_strain * (v_new - v)
    h_new = h
    if stock is not None and abs(expected / E - 1.0) > 2.0 * tol:  # the strain by the thickness, at a constant rate
        here = _at_speed(dataclasses.replace(ctx, aim_rate=ctx.rate(_forecast(ctx, length, v_new, stock, d, h))),
                         length, stock, d, h, v_new)
        level = dataclasses.replace(ctx, aim_rate=ctx.rate(here.prediction))
        h_lo, h_hi = stock.thickness_range
        h_probe = min(max(h * (1.2 if expected < E else 1 / 1.2), h_lo), h_hi)
        there = _at_speed(level, length, stock, d, h_probe, v_new) if h_probe != h else None
        if there is not None and there.prediction is not None:
            slope_h = (there.prediction.final_strain - here.prediction.final_strain) / (h_probe - h)
            if slope_h > 0:
                h_new = round(min(max(h + (E - expected) / slope_h, h_lo), h_hi) * 1e5) / 1e5
                v_new = _at_speed(level, length, stock, d, h_new, v_new).speed
                expected = math.nan  # the thickness step takes care of the strain
    if math.isfinite(expected) and abs(expected / E - 1.0) > tol:
        # the thickness cannot help: balance the two misses (rate and strain move together with the speed)
        miss = (lambda dv: max(abs((reached_rate + slope_rate * dv) / R - 1.0),
                               abs((reached_strain + slope_strain * dv) / E - 1.0)))
        den = slope_rate / R + slope_strain / E
        steps = [v_new - v, 0.0] + ([(2.0 - reached_rate / R - reached_strain / E) / den] if den else [])
        v_new = min(max(v + min(steps, key=miss), lo), hi)
        if miss(v_new - v) > miss(0.0) - 0.01:  # not worth another preview
            return design
    p = _forecast(ctx, length, v_new, stock, d, h_new)
    if p is None:
        return design
    bias = (reached_rate / ctx.rate(base), reached_strain / base.final_strain)  # what the models miss
    aimed = dataclasses.replace(ctx, aim_rate=target.strain_rate / bias[0], aim_strain=target.strain / bias[1])
    trial = _Trial(length, v_new, stock, d, h_new, p, _score(aimed, p, v_new))
    return _finish(aimed, trial, design.reasons["specimen"], (), target.strain / target.strain_rate)


def _finish(ctx, trial: _Trial, spec_reason, notes, need):
    """Gather a chosen trial into a ShotDesign: band, record, dispersion, safety, reasons, notes."""
    length, stock, d, h, v, p = trial.length, trial.stock, trial.diameter, trial.thickness, trial.speed, trial.prediction
    target, rig, c, specimen = ctx.target, ctx.rig, ctx.constraints, ctx.specimen
    striker = _striker(ctx, length)
    shaper = None if stock is None else RodSpec(h, d, stock.modulus, stock.density, stock.law)
    shaper_table = None if stock is None else ctx.shaper_tables[stock.name]
    band = {}
    u = ctx.material.uncertainty
    for key, factor in (("low", 1.0 + u), ("high", 1.0 - u)):  # a stronger material: the lower rate
        q = predict_shot(rig, specimen, ctx.table.scaled(factor), striker, v, shaper, shaper_table,
                         strain_noise=c.strain_noise) if u > 0 else p
        band[key] = (q.mean_rate, q.final_strain)
    band["rate_range"] = tuple(sorted((band["low"][0], band["high"][0], p.mean_rate)))[::2]
    band["strain_range"] = tuple(sorted((band["low"][1], band["high"][1], p.final_strain)))[::2]
    timing = p.timing
    transit = specimen.length / specimen.wave_speed
    duration = max(timing["duration_s"], p.arrival_duration)  # what the reduction will measure
    rate_choice = sample_rate_needed(timing["rise_time_s"], duration, transit, c.sample_rates)
    dt_rec = 1.0 / rate_choice["sample_rate_Hz"]
    window = window_check(duration, rig, dt_rec)
    needs = record_needs(duration, rig, dt_rec, specimen_transit=transit)
    spec = VirtualShotSpec(striker=striker, incident=rig.incident, transmitted=rig.transmitted, specimen=specimen,
                           striker_speed=v, incident_gauge_distance=rig.incident_gauge_distance,
                           transmitted_gauge_distance=rig.transmitted_gauge_distance,
                           duration=needs["record_length_s"], sample_rate=rate_choice["sample_rate_Hz"],
                           shaper=shaper, shaper_elements=4)
    safety = plan_shot(spec, rig.yield_strength)
    forecast_peak = rig.incident.modulus * float(np.max(p.strain_incident))  # dispersion ripples included
    worst = max(forecast_peak, safety["incident_bar_stress_MPa"] * 1e6)
    safety.update(forecast_peak_bar_stress_MPa=forecast_peak / 1e6, bar_stress_limit=c.bar_stress_limit,
                  peak_fraction_of_yield=None if not rig.yield_strength else worst / rig.yield_strength)
    # the ramp's strain acceleration: the rate's rise over the pulse's rise
    accel = p.mean_rate / max(timing["rise_time_s"], transit)
    specimen_info = {
        "davies_hunter_ratio": davies_hunter_ratio(ctx.material.poisson_ratio),
        "length_over_diameter": specimen.length / specimen.diameter,
        "diameter_after_m": diameter_after(specimen.diameter, min(p.final_strain, 0.95)),
        "transit_s": transit,
        "rise_transits": timing["rise_time_s"] / transit,
        "inertia_stress_Pa": float(inertia_stress(specimen.density, specimen.length, specimen.diameter,
                                                  ctx.material.poisson_ratio, accel)),
        "transmitted_strain_peak": float(np.max(p.stress)) * specimen.area / (rig.transmitted.modulus
                                                                              * rig.transmitted.area),
        "forecast_equilibrium_from_s": p.valid_span[0],
        "forecast_valid_fraction": p.valid_fraction,
    }
    bare = 2.0 * length / striker.wave_speed
    reasons = {
        "specimen": spec_reason,
        "striker": (f"{length * 1e3:g} mm (pulse 2L/c0 = {bare * 1e6:.0f} us) for a loading time of "
                    f"{need * 1e6:.0f} us (strain / rate); {v:.2f} m/s gives the rate (force balance on the "
                    f"transmitted bar, Kolsky 1949; striker relations, Kolsky 1953)"),
        "shaper": ("none (no shaper stock given)" if stock is None else
                   f"{stock.name}, {d * 1e3:g} mm x {h * 1e3:.2f} mm: a plastic disc (Frew, Forrestal & Chen "
                   f"2002) ramps the pulse over {timing['rise_time_s'] * 1e6:.0f} us "
                   f"({specimen_info['rise_transits']:.0f} specimen transits) and stretches it to "
                   f"{timing['duration_s'] * 1e6:.0f} us; crushed to {p.shaper_strain:.2f}"),
    }
    notes = list(notes)
    lo, hi = c.speed_range
    if not lo <= v <= hi or (v in (lo, hi) and abs(p.mean_rate / ctx.aim_rate - 1) > 0.02):
        notes.append(f"the target rate needs a speed outside the gun's range {lo:g}-{hi:g} m/s")
    if abs(p.final_strain / ctx.aim_strain - 1) > 2 * c.strain_tolerance:
        notes.append(f"the strikers and shaper stock reach a strain of {p.final_strain:.3f}, not {target.strain:g}")
    if rig.yield_strength and worst > c.bar_stress_limit * rig.yield_strength:
        notes.append(f"the bar stress {worst / 1e6:.0f} MPa exceeds {100 * c.bar_stress_limit:.0f} % of the "
                     f"yield strength")
    if not window["fits"]:
        notes.append(f"the {duration * 1e6:.0f} us pulse does not fit between the gauges "
                     f"(window {window['window_length_s'] * 1e6:.0f} us, overlap limit "
                     f"{window['overlap_limit_s'] * 1e6:.0f} us, echo limit {window['echo_limit_s'] * 1e6:.0f} us)")
    return ShotDesign(target=target, material=ctx.material, spec=spec,
                      shaper_stock=None if stock is None else stock.name, prediction=p, band=band,
                      specimen=specimen_info, reasons=reasons, safety=safety,
                      record={**rate_choice, **needs, "pulse_duration_s": duration, "window": window},
                      dispersion=dispersion_severity(timing["rise_time_s"], 0.5 * rig.incident.diameter,
                                                     rig.incident.wave_speed, rig.incident_poisson_ratio,
                                                     rig.incident_gauge_distance),
                      notes=tuple(notes))
