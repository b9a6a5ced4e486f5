"""REFERENCE ONLY: the virtual-shot time stepping as it was before the delay-line solver (as of commit e7a06c6).

A verbatim copy of the explicit staggered-grid (leapfrog) march of ``shpb.simulate`` over every node of the
rig (bars included), kept here - in the tests, never in the package - as the yardstick that the delay-line
solver is compared with (``tests/test_simulate_solver.py``) and timed against
(``benchmarks/bench_simulate.py``). It shares the grid set-up and the assembly of the result with the
package (``_check_spec``, ``_time_step``, ``_build_rods``, ``_assemble``, the gauge weights), so the two
differ only in how they advance in time. Do not "fix" or speed up this file: its worth is that it is the old
solver. The scheme is the textbook explicit leapfrog for the one-dimensional wave equation, stable up to
Courant number 1 (Courant, Friedrichs & Lewy 1928, Math. Ann. 100:32-74), where it is exact for a uniform rod.
"""

from __future__ import annotations

import math

import numpy as np

from shpb.errors import AnalysisError
from shpb.simulate import (_Rod, _assemble, _build_rods, _check_spec, _directional_weights, _gauge_weights,
                           _time_step)


def simulate_shot_reference(spec):
    """``shpb.simulate.simulate_shot`` with the old whole-rig leapfrog march (see the module docstring)."""
    laws = _check_spec(spec)
    dt = _time_step(spec)
    rods = _build_rods(spec, laws, dt)
    t_samples = np.arange(int(math.floor(spec.duration * spec.sample_rate + 1e-9)) + 1) / spec.sample_rate
    lower = np.floor(t_samples / dt + 1e-9).astype(np.int64)
    kept_steps = np.union1d(lower, lower + 1)
    rec, impact_force, e0, peak = _run(spec, rods, dt, kept_steps)
    for name, (value, _) in peak.items():
        if value >= 1.0:
            raise AnalysisError(f"the {name} was crushed to zero length (engineering strain {value:.2f}); the "
                                f"small-strain model does not hold: shorten the record or soften the impact")
    return _assemble(spec, rods, dt, t_samples, rec, impact_force, e0, peak)


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
    striker = by_name.get("striker")
    if striker is not None:
        v[striker.node0:striker.last_node + 1] = spec.striker_speed
    e0 = 0.5 * float(np.sum(mass * v * v))
    incident = by_name["incident"]
    drive = None
    if spec.incident_pulse is not None:  # force on the impact face, compression pushing +x, per step
        p = spec.incident_pulse
        strain = np.asarray(p.strain, dtype=float)
        drive = incident.spec.modulus * incident.spec.area * np.interp(
            np.arange(n_steps + 1) * dt, np.arange(strain.size) * p.dt, strain, left=0.0, right=0.0)
    eps = np.zeros(n_nodes - 1)
    F_pad = np.zeros(n_nodes + 1)  # element forces with a zero beyond each end of the chain
    F = F_pad[1:-1]
    node_force, dv, v_old = np.zeros(n_nodes), np.zeros(n_nodes - 1), np.zeros(n_nodes)
    plastic = [_PlasticState(r) for r in rods if r.law is not None]

    # contacts between consecutive rods: (left rod's last node, right rod's first node)
    a_idx = np.array([r.last_node for r in rods[:-1]], dtype=np.int64)
    b_idx = np.array([r.node0 for r in rods[1:]], dtype=np.int64)
    inv_ma, inv_mb = 1.0 / mass[a_idx], 1.0 / mass[b_idx]
    inv_w = 1.0 / (dt * (inv_ma + inv_mb))
    gap = np.zeros(a_idx.size)
    left_of = {rods[i + 1].name: i for i in range(len(rods) - 1)}  # contact on the left of each rod
    i_impact = left_of.get("incident")  # None when a prescribed pulse drives the incident bar
    # a free-end shot (no transmitted bar) has no contact beyond the incident bar
    i_front = left_of.get("specimen", left_of.get("transmitted"))
    i_back = left_of.get("transmitted")
    impact_force = np.zeros(n_steps + 1)

    gauge_inc = _gauge_weights(by_name["incident"], spec.incident_gauge_distance, from_end=True)
    waves_inc = _directional_weights(by_name["incident"], spec.incident_gauge_distance, from_end=True)
    transmitted = by_name.get("transmitted")
    if transmitted is not None:
        gauge_tra = _gauge_weights(transmitted, spec.transmitted_gauge_distance, from_end=False)
        waves_tra = _directional_weights(transmitted, spec.transmitted_gauge_distance, from_end=False)
    specimen = by_name.get("specimen")
    resolved = [r for r in rods if r.name in ("specimen", "shaper")]
    peak = {r.name: (0.0, 0.0) for r in resolved}
    rec = np.full((kept_steps.size, 15), np.nan)

    for n in range(n_steps + 1):
        i_row = row_of_step[n]
        if i_row >= 0:
            v_old[:] = v
        # nodes: v(n-1/2) -> v(n+1/2) from the element forces at n
        np.subtract(F_pad[1:], F_pad[:-1], out=node_force)
        if drive is not None:
            node_force[incident.node0] += drive[n]
        node_force *= dt_over_m
        v += node_force
        # compression-only contacts: the impulse that stops the end nodes overlapping at n+1
        va, vb = v[a_idx], v[b_idx]
        g = gap + dt * (vb - va)
        impulse = np.maximum(-g, 0.0) * inv_w
        v[a_idx] = va - impulse * inv_ma
        v[b_idx] = vb + impulse * inv_mb
        np.maximum(g, 0.0, out=gap)
        impact_force[n] = impulse[i_impact] / dt if drive is None else drive[n]
        if i_row >= 0:
            row = rec[i_row]
            row[0] = n * dt
            row[1] = -(gauge_inc[2] * eps[gauge_inc[0]] + gauge_inc[3] * eps[gauge_inc[1]])
            row[11:13] = _directional_waves(eps, v, waves_inc)
            if transmitted is not None:
                row[2] = -(gauge_tra[2] * eps[gauge_tra[0]] + gauge_tra[3] * eps[gauge_tra[1]])
                row[6:8] = impulse[[i_front, i_back]] / dt
                row[13:15] = _directional_waves(eps, v, waves_tra)
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



def _directional_waves(eps, v, weights):
    """Strain of the wave travelling +x and of the wave travelling -x at a station, compression positive.

    At Courant 1 in a uniform bar, node velocities v_j(n+1/2) and element
    strains eps_j(n) (element j right of node j) satisfy, for a wave R
    travelling +x and a wave L travelling -x (d'Alembert; tension positive),
    ``v_j = c0 (L_j - R_(j-1))``, so that

        R at node j = (eps_j - v_j / c0) / 2,   L at node j = (eps_(j-1) + v_j / c0) / 2,

    each the mean of the wave over the two elements beside the node, and
    R + L the mean strain there. This follows from the update itself
    (``v`` gains ``c0 (eps_j - eps_(j-1))`` per step at Courant 1, and
    ``R_j(n) = R_(j-1)(n-1)``, ``L_j(n) = L_(j+1)(n-1)``), so the split is
    exact on the grid, not an approximation of it. Called when ``v`` holds
    v(n+1/2) and ``eps`` holds eps(n).

    References
    ----------
    .. [1] K. F. Graff, Wave Motion in Elastic Solids, 1975, ch. 2
       (d'Alembert solution; v = -c0 eps for a wave travelling +x).
    """
    j0, j1, w0, w1, c = weights
    plus = w0 * (eps[j0] - v[j0] / c) + w1 * (eps[j1] - v[j1] / c)
    minus = w0 * (eps[j0 - 1] + v[j0] / c) + w1 * (eps[j1 - 1] + v[j1] / c)
    return -0.5 * plus, -0.5 * minus




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


