"""Reduce one shot: raw record -> validated stress–strain curve.

:func:`reduce_shot` passes the fields of a :class:`shpb.setup.Shot` to the
physics functions (``bridge``, ``pulses``, ``dispersion``, ``kolsky``,
``validity``) in the order of the data flow and gathers what they return in a
:class:`ShotResult`. It computes no physics itself.
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Optional

import numpy as np
import pandas as pd

from . import __version__, bridge, kolsky, pulses, validity
from .errors import AnalysisError, InputError
from .io import Record, atomic_write_csv, atomic_write_json, read_record
from .setup import Bar, Gauge, Shot
from .validity import Flag

#: Written into every summary and printed by the commands that judge shots.
DESIGN_CAUTION = ("Curves used for design need independent validation. Bar-stress and validity flags do not replace "
                  "the laboratory's safety rules, local codes and licensed practice.")

#: Time over which R(t) is averaged before the equilibrium test [s].
EQUILIBRIUM_AVERAGING = 0.25e-6

CURVES_FILE = "curves.csv"
SUMMARY_FILE = "summary.json"
FIGURE_FILE = "shot.png"


@dataclass
class ShotResult:
    """What the reduction of one shot gives.

    Attributes
    ----------
    name : str
    curves : pandas.DataFrame
        One row per time sample of the analysis window; columns as in
        ``docs/nomenclature.md`` (units in the names).
    summary : dict
        Scalar results (``results``), inputs, record hashes, provenance.
    flags : list of Flag
    traces : dict
        Raw material for figures: record time [s], bar strains at the gauges,
        windows (not written to disk).
    """

    name: str
    curves: pd.DataFrame
    summary: dict
    flags: list = field(default_factory=list)
    traces: dict = field(default_factory=dict, repr=False)

    @property
    def valid(self) -> bool:
        """True when no flag is an error."""
        return not any(f.severity == "error" for f in self.flags)

    def write(self, out_dir, figure=True) -> Path:
        """Write ``curves.csv``, ``summary.json`` and (optionally) the figure sheet into ``out_dir``, atomically."""
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        atomic_write_csv(out / CURVES_FILE, self.curves)
        if figure and self.traces:
            from .io import atomic_savefig
            from .report import plot_shot

            atomic_savefig(plot_shot(self), out / FIGURE_FILE, dpi=110)
        # the summary last: its presence marks a complete result folder
        atomic_write_json(out / SUMMARY_FILE, self.summary)
        return out

    @classmethod
    def read(cls, folder) -> "ShotResult":
        """Read a result folder written by :meth:`write`."""
        folder = Path(folder)
        for f in (CURVES_FILE, SUMMARY_FILE):
            if not (folder / f).is_file():
                raise InputError(f"not a shot result folder (no {f})", str(folder))
        summary = json.loads((folder / SUMMARY_FILE).read_text())
        flags = [Flag(**f) for f in summary.get("flags", [])]
        return cls(name=summary.get("shot", folder.name), curves=pd.read_csv(folder / CURVES_FILE),
                   summary=summary, flags=flags)


# --------------------------------------------------------------------------- wave transfer
def _carry(channel, dt, start, stop, distance, bar: Bar, use_dispersion, amplitude_factors, ramp):
    """Carry one wave from its gauge window to its face: with the bar's dispersion, or as a pure delay."""
    if not use_dispersion:
        return pulses.carry_wave(channel, dt, start, stop, distance / bar.wave_speed, ramp)
    from . import dispersion

    def mover(seg):
        return dispersion.propagate(seg, dt, distance, bar.radius, bar.wave_speed, bar.poisson_ratio,
                                    amplitude_factors=amplitude_factors)

    return pulses.carry_wave(channel, dt, start, stop, distance / bar.wave_speed, ramp, mover)


def _strain(volts, gauge: Gauge, bar: Bar):
    return bridge.bar_strain(volts, bridge=gauge.bridge, gauge_factor=gauge.gauge_factor,
                             excitation=gauge.excitation, gain=gauge.gain, polarity=gauge.polarity,
                             scale=gauge.scale, poisson=bar.poisson_ratio)


# --------------------------------------------------------------------------- the reduction
def reduce_shot(shot: Shot, record: Optional[Record] = None) -> ShotResult:
    """Reduce one shot.

    Parameters
    ----------
    shot : Shot
        The setup (bar set, specimen, record mapping, analysis options).
    record : Record, optional
        An already-read record; read from ``shot.record`` when None.

    Returns
    -------
    ShotResult

    Raises
    ------
    InputError
        Unreadable or inconsistent record.
    AnalysisError
        No incident pulse, or nothing to analyse.
    """
    opt, bs, sp = shot.analysis, shot.barset, shot.specimen
    rec = record if record is not None else read_record(shot.record)
    dt, n = rec.dt, rec.time.size
    flags: list[Flag] = []
    prov = []
    where = str(shot.source or shot.name)

    # 1. baseline and bridge conversion -------------------------------------------------
    raw_i, raw_t = rec.incident, rec.transmitted
    if opt.pre_trigger:
        n_pre = min(int(opt.pre_trigger / dt), n // 2)
        vi = raw_i - pulses.noise_floor(raw_i, n_pre)[0]
    else:  # first pass: level and noise from the whole record
        n_pre = None
        vi = raw_i - pulses.robust_noise(raw_i)[0]
    if opt.incident_start is not None:
        foot = (opt.incident_start - rec.time[0]) / dt
        if not 0 <= foot < n:
            raise InputError(f"incident_start {opt.incident_start * 1e6:g} us is outside the record "
                             f"({rec.time[0] * 1e6:g} to {rec.time[-1] * 1e6:g} us)", where)
    else:
        # the bridge is monotonic: the foot can be found on the sign-corrected volts
        foot = pulses.find_foot(bs.incident_gauge.polarity * vi, n_pre)
        if foot is None:
            raise AnalysisError(f"{where}: no incident pulse found on the incident channel "
                                f"(nothing rises above 8x its noise)")
    if foot < 16:
        raise AnalysisError(f"{where}: the incident pulse starts {foot:.0f} samples into the record: "
                            f"no pre-trigger baseline (record at least 16 samples before the pulse)")
    # second pass: the baseline is the whole quiet part before the foot, less a margin
    n_base = max(16, int(0.9 * foot)) if n_pre is None else n_pre
    vi = raw_i - pulses.noise_floor(raw_i, n_base)[0]
    vt = raw_t - pulses.noise_floor(raw_t, n_base)[0]
    prov.append({"step": "bridge", "parameters": {"incident": bs.incident_gauge.bridge,
                                                  "transmitted": bs.transmitted_gauge.bridge,
                                                  "baseline_samples": n_base}})

    # 2. windows --------------------------------------------------------------------------
    bi, bt = bs.incident, bs.transmitted
    ci, ct = bi.wave_speed, bt.wave_speed
    di, dtr = bs.incident_gauge.distance, bs.transmitted_gauge.distance
    end = pulses.pulse_end(bs.incident_gauge.polarity * vi, foot, fraction=0.05)  # the bridge is monotonic
    if end is not None:
        duration, duration_source = (end - foot) * dt, "measured (incident pulse down to 5 % of its peak)"
    elif bs.striker is not None:
        duration, duration_source = bs.striker.pulse_duration, "striker 2L/c0"
    else:
        raise AnalysisError(f"{where}: the incident pulse does not end before the record does")
    f = validity.overlap_flag(duration, di, ci, "incident")
    if f:
        flags.append(f)
    plan = pulses.plan_window(foot, duration, dt, rec.time[0], rec.time[-1], window=opt.window,
                              incident_distance=di, incident_speed=ci, incident_length=bi.length,
                              transmitted_distance=dtr, transmitted_speed=ct, transmitted_length=bt.length)
    t_foot, t_face0, window, window_source = plan.t_foot, plan.t_face0, plan.window, plan.source
    k0, k1, ramp = plan.k0, plan.k1, plan.ramp

    # 3. each wave to its face ---------------------------------------------------------------
    # volts -> strain only as far as the last window reaches (records are often far longer)
    last = k1 + max(di / ci, dtr / ct) / dt + max(opt.reflected_adjust, opt.transmitted_adjust, 0.0) / dt
    k_end = min(n, int(math.ceil(last)) + int(0.1 * (k1 - k0)) + 2 * ramp + 16)
    si = _strain(vi[:k_end], bs.incident_gauge, bs.incident)
    st = _strain(vt[:k_end], bs.transmitted_gauge, bs.transmitted)
    use_disp = bool(opt.dispersion)
    waves = {}
    gauge_windows = {}
    for name, chan, dist, bar in (("incident", si, +di, bs.incident), ("reflected", si, -di, bs.incident),
                                  ("transmitted", st, -dtr, bs.transmitted)):
        # a hand adjustment of the alignment: the wave is taken `adjust` seconds later at its gauge
        adjust = {"reflected": opt.reflected_adjust, "transmitted": opt.transmitted_adjust}.get(name) or 0.0
        shift = dist / bar.wave_speed / dt - adjust / dt
        # window at the gauge: the face window moved back by the travel time
        g0, g1 = k0 - shift, k1 - shift
        gauge_windows[name] = (rec.time[0] + g0 * dt, rec.time[0] + g1 * dt)
        face, plain = _carry(chan, dt, g0, g1, dist, bar, use_disp, opt.amplitude_factors, ramp)
        if adjust:
            face, plain = pulses.delay(face, dt, -adjust), pulses.delay(plain, dt, -adjust)
        if k1 > face.size:  # the window runs past the record's end: zeros there (flagged below)
            face, plain = np.pad(face, (0, k1 - face.size)), np.pad(plain, (0, k1 - plain.size))
        waves[name] = (face[k0:k1], plain[k0:k1])
    if k1 > n:
        end_needed = rec.time[0] + (k1 - 1) * dt
        flags.append(Flag("record_truncated", "error",
                          f"the record ends at {rec.time[-1] * 1e6:.1f} us, before the analysis window does "
                          f"({end_needed * 1e6:.1f} us)"))
    passed = max(gauge_windows["transmitted"][1], gauge_windows["reflected"][1])
    if passed > rec.time[-1] or window < duration:
        if not any(f.code == "record_truncated" for f in flags):
            flags.append(Flag("record_truncated", "error",
                              f"the record ends at {rec.time[-1] * 1e6:.1f} us, before the transmitted "
                              f"(or reflected) pulse has passed its gauge "
                              f"(the {duration * 1e6:.0f} us pulse needs the record to "
                              f"{(passed + max(duration - window, 0)) * 1e6:.1f} us)"))
    ei, er, et = (waves[k][0] for k in ("incident", "reflected", "transmitted"))
    disp_info = {"applied": use_disp}
    if use_disp:
        from . import dispersion

        disp_info.update(dispersion.dispersion_info(bi.radius, ci, bi.poisson_ratio, dt=dt,
                                                    amplitude_factors=opt.amplitude_factors))
        disp_info["distances_m"] = {"incident": di, "reflected": -di, "transmitted": -dtr}
        if (bt.radius, ct, bt.poisson_ratio) != (bi.radius, ci, bi.poisson_ratio):
            disp_info["transmitted_bar"] = dispersion.dispersion_info(
                bt.radius, ct, bt.poisson_ratio, dt=dt, amplitude_factors=opt.amplitude_factors)
        peak = max(np.max(np.abs(ei)), 1e-30)
        for k, (face, plain) in waves.items():
            disp_info[f"max_change_{k}_percent_of_incident_peak"] = float(100 * np.max(np.abs(face - plain)) / peak)
    prov.append({"step": "shift", "parameters": {"incident_wave_speed_m_per_s": ci,
                                                 "transmitted_wave_speed_m_per_s": ct,
                                                 "dispersion": disp_info}})

    # transmitted pulse present?
    _, noise_t = pulses.noise_floor(st, n_base)
    et_peak = float(np.max(et)) if et.size else 0.0
    if et_peak < max(8 * noise_t, 0.01 * float(np.max(ei))):
        flags.append(Flag("no_transmitted_pulse", "error",
                          f"no transmitted pulse found (peak {et_peak:.3g} against noise {noise_t:.3g}): "
                          f"check the transmitted channel and the specimen contact"))

    # 4. Kolsky analysis -----------------------------------------------------------------------
    tau = rec.time[0] + np.arange(k0, k1) * dt - t_face0
    f1, f2 = kolsky.face_forces(ei, er, et, bi.modulus, bi.area, bt.modulus, bt.area)
    v1, v2 = kolsky.face_velocities(ei, er, et, ci, ct)
    rate = kolsky.strain_rate(v1, v2, sp.length)
    rate_r = kolsky.strain_rate_reflected(er, ci, sp.length)
    strain = kolsky.integrate(rate, dt)
    strain_r = kolsky.integrate(rate_r, dt)
    sig = kolsky.stresses(f1, f2, sp.area)
    stress = sig[opt.stress]
    if np.any(strain >= 1.0):
        raise AnalysisError(f"{where}: the engineering strain reaches {np.max(strain):.2f} (>= 1): "
                            f"check the specimen length and the bar setup")
    true_strain, true_stress = kolsky.true_stress_strain(strain, stress)
    ratio = kolsky.equilibrium_ratio(f1, f2, floor=0.025 * max(float(np.max(f1 + f2)), 1e-30))
    prov.append({"step": "kolsky", "parameters": {"reported_stress": opt.stress, "strain_rate": "three-wave"}})

    # 5. validity --------------------------------------------------------------------------------
    transit = sp.length / math.sqrt(sp.modulus / sp.density) if sp.modulus and sp.density else None
    judged = validity.assess_curve(tau, rate, f1, f2, strain, stress, dt=dt,
                                   threshold=opt.equilibrium_threshold, yield_offset=opt.yield_offset,
                                   specimen_modulus=sp.modulus, specimen_transit=transit,
                                   averaging=EQUILIBRIUM_AVERAGING)
    valid, results = judged.valid, judged.results
    flags.extend(judged.flags)
    # bars and record
    for bar_name, chan, bar in (("incident", si, bi), ("transmitted", st, bt)):
        pk = float(np.max(np.abs(chan[n_base:]))) if chan.size > n_base else 0.0
        results[f"peak_bar_stress_{bar_name}_MPa"] = bar.modulus * pk / 1e6
        f = validity.bar_stress_flag(pk, bar.modulus, bar.material.yield_strength, bar_name)
        if f:
            flags.append(f)
    # a channel can only hit its rail while a pulse passes: check the pulse windows
    w0 = max(int(gauge_windows["incident"][0] / dt - rec.time[0] / dt), 0)
    w1 = min(int(max(w[1] for w in gauge_windows.values()) / dt - rec.time[0] / dt) + 1, n)
    for chan_name, raw, g in (("incident", raw_i, bs.incident_gauge), ("transmitted", raw_t, bs.transmitted_gauge)):
        f = validity.clipping_flag(raw[w0:w1], chan_name, g.full_scale, duration / dt)
        if f:
            flags.append(f)
    rt = 2 * (bt.length - dtr) / ct
    if duration > rt:
        flags.append(Flag("transmitted_overlap", "warning",
                          f"the {duration * 1e6:.0f} us pulse is longer than the {rt * 1e6:.0f} us echo time from the "
                          f"transmitted bar's far end to its gauge"))
    results.update({
        "incident_foot_time_us": t_foot * 1e6,
        "pulse_duration_us": duration * 1e6,
        "pulse_duration_source": duration_source,
        "window_us": window * 1e6,
        "window_source": window_source,
        "incident_wave_speed_m_per_s": ci,
        "incident_wave_speed_source": _speed_source(bs, "incident"),
        "transmitted_wave_speed_m_per_s": ct,
        "transmitted_wave_speed_source": _speed_source(bs, "transmitted"),
        "peak_incident_strain": float(np.max(ei)),
        "sample_interval_us": dt * 1e6,
    })
    prov.append({"step": "validity", "parameters": {"equilibrium_threshold": opt.equilibrium_threshold,
                                                    "yield_offset": opt.yield_offset}})
    for p in prov:
        p["version"] = __version__

    curves = pd.DataFrame({
        "time_us": tau * 1e6,
        "strain_incident": ei, "strain_reflected": er, "strain_transmitted": et,
        "force_front_kN": f1 / 1e3, "force_back_kN": f2 / 1e3,
        "velocity_front_m_per_s": v1, "velocity_back_m_per_s": v2,
        "equilibrium_R": ratio,
        "strain_rate_per_s": rate, "strain_rate_reflected_per_s": rate_r,
        "strain": strain, "strain_from_reflected": strain_r,
        "stress_1wave_MPa": sig["1-wave"] / 1e6, "stress_2wave_MPa": sig["2-wave"] / 1e6,
        "stress_3wave_MPa": sig["3-wave"] / 1e6, "stress_MPa": stress / 1e6,
        "true_strain": true_strain, "true_stress_MPa": true_stress / 1e6,
        "valid": valid.astype(int),
    })
    summary = {
        "shot": shot.name,
        "package_version": __version__,
        "valid": not any(f.severity == "error" for f in flags),
        "results": results,
        "flags": [f.as_dict() for f in flags],
        "inputs": _inputs(shot),
        "records": rec.files,
        "provenance": prov,
        "columns": COLUMN_NOTES,
        "caution": DESIGN_CAUTION,
    }
    traces = {"time": rec.time[:k_end], "strain_incident_gauge": si, "strain_transmitted_gauge": st,
              "volts_incident": raw_i[:k_end], "volts_transmitted": raw_t[:k_end], "gauge_windows": gauge_windows,
              "t_face0": t_face0, "yield": (results.get("yield_strain"), results.get("yield_stress_MPa"))}
    return ShotResult(name=shot.name, curves=curves, summary=summary, flags=flags, traces=traces)


#: Which form each output column uses (written into every summary).
COLUMN_NOTES = {
    "strain_incident/reflected/transmitted": "bar strains moved to the specimen faces, compression positive",
    "force_front_kN": "F1 = E_i A_i (eps_i + eps_r), incident-bar face",
    "force_back_kN": "F2 = E_t A_t eps_t, transmitted-bar face",
    "equilibrium_R": "2 (F1 - F2) / (F1 + F2)",
    "strain_rate_per_s": "three-wave: (v1 - v2) / L_s with v1 = c_i (eps_i - eps_r), v2 = c_t eps_t",
    "strain_rate_reflected_per_s": "classic: -2 c_i eps_r / L_s (assumes equilibrium)",
    "strain": "time integral of strain_rate_per_s (engineering)",
    "strain_from_reflected": "time integral of strain_rate_reflected_per_s",
    "stress_1wave_MPa": "F2 / A_s (back face)",
    "stress_2wave_MPa": "F1 / A_s (front face)",
    "stress_3wave_MPa": "(F1 + F2) / (2 A_s)",
    "stress_MPa": "the reported stress, per the analysis option 'stress'",
    "true_strain": "-ln(1 - strain)",
    "true_stress_MPa": "stress_MPa (1 - strain)",
    "valid": "1 inside the loading part after force equilibrium",
}


def _speed_source(barset, which) -> str:
    """Where a bar's wave speed came from: its calibration file, the bar set, or sqrt(E/rho)."""
    if f"{which}.wave_speed_m_per_s" in barset.calibration.get("applied", {}):
        return f"calibration ({barset.calibration.get('file')})"
    return "measured (bar set)" if getattr(barset, which).measured_wave_speed else "sqrt(E/rho)"


def _inputs(shot: Shot) -> dict:
    """The resolved setup, SI, for the summary."""
    bs = shot.barset

    def bar(b: Bar, g: Gauge):
        d = {"material": asdict(b.material), "diameter_m": b.diameter, "length_m": b.length,
             "measured_wave_speed_m_per_s": b.measured_wave_speed, "gauge": asdict(g)}
        return d

    sp = shot.specimen
    return {
        "barset": {"name": bs.name, "source": bs.source, "calibration": bs.calibration,
                   "incident": bar(bs.incident, bs.incident_gauge),
                   "transmitted": bar(bs.transmitted, bs.transmitted_gauge),
                   "striker": (asdict(bs.striker) if bs.striker else None)},
        "specimen": {"length_m": sp.length, "diameter_m": sp.diameter, "material": sp.material,
                     "temperature_K": sp.temperature, "modulus_Pa": sp.modulus, "density_kg_per_m3": sp.density},
        "record": {"incident": str(shot.record.incident.file), "incident_column": shot.record.incident.column,
                   "transmitted": str(shot.record.transmitted.file),
                   "transmitted_column": shot.record.transmitted.column},
        "analysis": asdict(shot.analysis),
        "source": shot.source,
    }


def reduce_file(shot_path, out_dir=None, figure=True, **analysis_changes) -> ShotResult:
    """Load a shot file, reduce it and (if ``out_dir``) write the result folder."""
    from .setup import load_shot, with_analysis

    shot = load_shot(shot_path)
    if analysis_changes:
        shot = with_analysis(shot, **analysis_changes)
    result = reduce_shot(shot)
    if out_dir is not None:
        result.write(out_dir, figure=figure)
    return result
