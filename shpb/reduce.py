"""Reduce one shot: raw record -> validated stress–strain curve, as a sequence of named stages.

``reduce_shot`` is only that sequence; each stage is a function in the module
of its physics and returns a frozen dataclass that can be run, inspected and
plotted alone::

    Record ─ pulses.condition_record ─> GaugeStrains     (baselines, incident foot, volts -> bar strain)
           ─ separation.separate_waves ─> Separation     (two-point separation, where the waves overlap)
           ─ pulses.plan_analysis    ─> WindowPlan       (pulse duration, analysis window, each wave's gauge window)
           ─ separation.waves_at_faces ─> FaceWaves      (each wave carried to its face, dispersion corrected,
                                                          or the separated waves)
           ─ kolsky.kolsky_curves    ─> KolskyCurves     (forces, velocities, rates, strains, stresses)
           ─ validity.judge          ─> Verdict          (every flag, valid part, R(t) that decided)
           ─ specimen.specimen_corrections ─> SpecimenCorrections (inertia, friction: beside the stress)
           ─ uncertainty.propagate   ─> ShotUncertainty  (u and U of every row and scalar, budget; optional)
           ─ ShotResult              (curves table + summary + flags; owns the result folder)
"""

from __future__ import annotations

import json
from contextlib import contextmanager
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Optional

import numpy as np
import pandas as pd

from . import __version__, kolsky, pulses, separation, specimen, validity
from .errors import AnalysisError, InputError
from .io import Record, atomic_write_csv, atomic_write_json, check_time_base, read_record
from .setup import Bar, Gauge, Shot
from .validity import Flag

#: Written into every summary and printed by the commands that judge shots.
DESIGN_CAUTION = ("Curves used for design need independent validation. Bar-stress and validity flags do not replace "
                  "the laboratory's safety rules, local codes and licensed practice.")


@dataclass(frozen=True)
class Stages:
    """The stage results of one reduction (kept in memory, not written)."""

    record: Record
    strains: pulses.GaugeStrains
    plan: pulses.WindowPlan
    waves: pulses.FaceWaves
    curves: kolsky.KolskyCurves
    verdict: validity.Verdict
    separation: Optional[separation.Separation] = None
    corrections: Optional[specimen.SpecimenCorrections] = None
    uncertainty: Optional[object] = None  # shpb.uncertainty.ShotUncertainty, when the analysis asks for it


@dataclass(frozen=True)
class ShotResult:
    """What the reduction of one shot gives, and the one owner of a shot's result folder.

    A result folder holds :attr:`CURVES_FILE`, :attr:`SUMMARY_FILE` (written
    last: its presence marks a complete folder) and optionally
    :attr:`FIGURE_FILE` and :attr:`BUDGET_FILE` (the uncertainty budget);
    campaigns add their own key file beside them.

    Attributes
    ----------
    name : str
    curves : pandas.DataFrame
        One row per time sample of the analysis window; columns as in
        ``docs/nomenclature.md`` (units in the names).
    summary : dict
        Scalar results (``results``), flags, inputs, record hashes, provenance.
    flags : tuple of Flag
    stages : Stages or None
        The stage results (None for a result read back from disk).
    """

    name: str
    curves: pd.DataFrame
    summary: dict
    flags: tuple = ()
    stages: Optional[Stages] = field(default=None, repr=False, compare=False)

    CURVES_FILE = "curves.csv"
    SUMMARY_FILE = "summary.json"
    FIGURE_FILE = "shot.png"
    BUDGET_FILE = "uncertainty_budget.csv"
    #: Files a result folder may hold, written in this order (the summary last).
    FILES = (CURVES_FILE, BUDGET_FILE, FIGURE_FILE, SUMMARY_FILE)

    @property
    def valid(self) -> bool:
        """True when no flag is an error."""
        return not any(f.severity == "error" for f in self.flags)

    @property
    def traces(self) -> dict:
        """What the figure sheet draws beside the curves: the records at the gauges and the windows."""
        if self.stages is None:
            return {}
        st, plan = self.stages.strains, self.stages.plan
        last = plan.last_sample(st.time.size)
        res = self.summary["results"]
        windows = plan.gauge_window_times(float(st.time[0]), st.dt)
        separated = self.stages.waves.separated_bars
        if "incident" in separated:  # not cut at the gauge: the span the separated waves cover there
            a, b = windows.pop("incident"), windows.pop("reflected")
            windows = {"incident + reflected (separated)": (min(a[0], b[0]), max(a[1], b[1])), **windows}
        if "transmitted" in separated:
            windows["transmitted (separated)"] = windows.pop("transmitted")
        stations = {f"{s.bar}-bar station at {s.gauge.distance * 1e3:g} mm": s.strain[:last]
                    for s in st.stations.values() if s.bar in separated}
        return {"time": st.time[:last], "strain_incident_gauge": st.incident[:last],
                "strain_transmitted_gauge": st.transmitted[:last], "volts_incident": st.volts_incident[:last],
                "volts_transmitted": st.volts_transmitted[:last], "stations": stations,
                "gauge_windows": windows, "t_face0": plan.t_face0,
                "yield": (res.get("yield_strain"), res.get("yield_stress_MPa"))}

    def plot(self):
        """The figure sheet of the shot (a matplotlib Figure; nothing is written or shown)."""
        from .report import plot_shot

        return plot_shot(self)

    def write(self, out_dir, figure=True) -> Path:
        """Write the result folder ``out_dir`` atomically, the summary last."""
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        atomic_write_csv(out / self.CURVES_FILE, self.curves)
        if self.stages is not None and self.stages.uncertainty is not None:
            atomic_write_csv(out / self.BUDGET_FILE, self.stages.uncertainty.budget_table())
        elif (out / self.BUDGET_FILE).exists():  # an older result's budget does not describe this one
            (out / self.BUDGET_FILE).unlink()
        if figure and self.stages is not None:
            from .io import atomic_savefig

            atomic_savefig(self.plot(), out / self.FIGURE_FILE, dpi=110)
        # the summary last: its presence marks a complete result folder
        atomic_write_json(out / self.SUMMARY_FILE, self.summary)
        return out

    @classmethod
    def is_result_folder(cls, folder) -> bool:
        """True when ``folder`` holds a complete result (curves and summary)."""
        folder = Path(folder)
        return (folder / cls.CURVES_FILE).is_file() and (folder / cls.SUMMARY_FILE).is_file()

    @classmethod
    def read_summary(cls, folder) -> dict:
        """The summary of a result folder; InputError naming the file if it is missing or not a JSON object."""
        path = Path(folder) / cls.SUMMARY_FILE
        if not path.is_file():
            raise InputError(f"not a shot result folder (no {cls.SUMMARY_FILE})", str(folder))
        try:
            summary = json.loads(path.read_text(encoding="utf-8"))
        except json.JSONDecodeError as exc:
            raise InputError(f"not valid JSON ({exc.msg}, line {exc.lineno})", str(path)) from None
        except UnicodeDecodeError as exc:
            raise InputError(f"not UTF-8 text ({exc.reason} at byte {exc.start})", str(path)) from None
        if not isinstance(summary, dict):
            raise InputError("expected a JSON object (the shot summary)", str(path))
        return summary

    @classmethod
    def read(cls, folder) -> "ShotResult":
        """Read a result folder written by :meth:`write`."""
        folder = Path(folder)
        if not (folder / cls.CURVES_FILE).is_file():
            raise InputError(f"not a shot result folder (no {cls.CURVES_FILE})", str(folder))
        summary = cls.read_summary(folder)
        flags = tuple(Flag(**f) for f in summary.get("flags", []))
        return cls(name=summary.get("shot", folder.name), curves=pd.read_csv(folder / cls.CURVES_FILE),
                   summary=summary, flags=flags)


# --------------------------------------------------------------------------- the reduction
def reduce_shot(shot: Shot, record: Optional[Record] = None, *, announce=None) -> ShotResult:
    """Reduce one shot, stage by stage.

    Parameters
    ----------
    shot : Shot
        The setup (bar set, specimen, record mapping, analysis options).
    record : Record, optional
        An already-read or in-memory record (:meth:`shpb.io.Record.from_arrays`);
        read from ``shot.record`` when None.
    announce : callable, optional
        ``announce(result)`` is called with the verdict's result as soon as the
        verdict is known, before the uncertainty stage (which costs tens of
        reductions), so that the verdict at the gun does not wait for it. The
        result it gets has no uncertainty; the returned one has it when the
        analysis asks for it.

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
    bs, opt = shot.barset, shot.analysis
    with _named(str(shot.source or shot.name)):
        if record is None:
            if shot.record is None:
                raise InputError("no record: give the shot a [record] table or pass a Record", "record")
            record = read_record(shot.record)
        check_time_base(record, shot)  # a unit typo is refused before the stages size anything by it
        strains = pulses.condition_record(record, bs, opt)
        split, plan, waves = face_stages(strains, bs, opt)
        curves = kolsky.kolsky_curves(waves, bs, shot.specimen, opt.stress)
        verdict = validity.judge(strains, plan, waves, curves, bs, shot.specimen, opt, shot.striker_speed)
        corrections = specimen.specimen_corrections(curves, plan, shot.specimen, opt, verdict.valid, waves.dt)
        stages = Stages(record, strains, plan, waves, curves, verdict, split, corrections)
        if not opt.uncertainty:
            result = _result(shot, stages)
            if announce is not None:
                announce(result)
            return result
        if announce is not None:
            announce(_result(shot, stages))  # the verdict first: the uncertainty stage costs tens of reductions
        from .uncertainty import propagate

        stages = replace(stages, uncertainty=propagate(shot, stages))
    return _result(shot, stages)


def face_stages(strains: pulses.GaugeStrains, barset, analysis) -> tuple:
    """Stages 2a, 2 and 3 on a conditioned record: (Separation, WindowPlan, FaceWaves).

    The uncertainty stage reruns them with drawn inputs (:mod:`shpb.uncertainty`).
    """
    split = separation.separate_waves(strains, barset, analysis)  # used where the waves overlap
    plan = pulses.plan_analysis(strains, barset, analysis, **split.plan_options())
    return split, plan, separation.waves_at_faces(split, strains, plan, barset, analysis)


@contextmanager
def _named(where: str):
    """Errors of the stages name the shot they came from."""
    try:
        yield
    except AnalysisError as exc:
        raise AnalysisError(f"{where}: {exc}") from None
    except InputError as exc:
        if exc.source and Path(exc.source.split(":")[0]).suffix:  # already names a file
            raise
        raise InputError(exc.bare_message, f"{where}: {exc.source}" if exc.source else where) from None


def _result(shot: Shot, st: Stages) -> ShotResult:
    """Gather the stage results into the curves table and the summary."""
    bs, v = shot.barset, st.verdict
    extra = st.corrections  # the specimen's inertia and friction: beside the stress, with their own flags
    results = {**v.results, **st.plan.results(), "face_waves_method": separation.METHOD_CLASSIC,
               **st.waves.results(), **(extra.results if extra else {})}
    flags = tuple(v.flags) + (extra.flags if extra else ())
    for which in ("incident", "transmitted"):
        results[f"{which}_wave_speed_m_per_s"] = getattr(bs, which).wave_speed
        results[f"{which}_wave_speed_source"] = _speed_source(bs, which)
    provenance = [st.strains.condition_provenance, st.strains.provenance,
                  *([st.separation.provenance] if st.separation else []),
                  _shift_provenance(bs, st.waves), st.curves.provenance,
                  {"step": "validity", "parameters": {"equilibrium_threshold": shot.analysis.equilibrium_threshold,
                                                      "equilibrium_false_alarm": validity.EQUILIBRIUM_FALSE_ALARM,
                                                      "min_valid_fraction": validity.MIN_VALID_FRACTION,
                                                      "yield_offset": shot.analysis.yield_offset}},
                  *([extra.provenance] if extra else [])]
    provenance[1]["parameters"].update({"incident": bs.incident_gauge.bridge,
                                        "transmitted": bs.transmitted_gauge.bridge})
    unc = st.uncertainty
    if unc is not None:
        results.update(unc.results())
        provenance.append(unc.provenance)
    for p in provenance:
        p["version"] = __version__
    summary = {
        "shot": shot.name,
        "package_version": __version__,
        "valid": v.is_valid,
        "results": results,
        "flags": [f.as_dict() for f in flags],
        "inputs": _inputs(shot),
        "records": {_resolved(k): v for k, v in st.record.files.items()},
        "provenance": provenance,
        "columns": COLUMN_NOTES,
        "caution": DESIGN_CAUTION,
    }
    if unc is not None:
        summary["uncertainty"] = unc.summary()
    return ShotResult(name=shot.name, curves=curves_table(st.waves, st.curves, v, extra, unc), summary=summary,
                      flags=flags, stages=st)


def _shift_provenance(barset, waves) -> dict:
    p = waves.provenance
    p["parameters"] = {"incident_wave_speed_m_per_s": barset.incident.wave_speed,
                       "transmitted_wave_speed_m_per_s": barset.transmitted.wave_speed, **p["parameters"]}
    return p


def curves_table(waves, curves, verdict, corrections=None, uncertainty=None) -> pd.DataFrame:
    """The ``curves.csv`` table of a shot from its stages (units in the column names); with the uncertainty
    stage, the standard and expanded uncertainties of stress, strain and strain rate after ``valid``."""
    sig = curves.stress_by_form
    n = curves.time.size
    extra = corrections.columns(n) if corrections else {k: np.full(n, np.nan)
                                                        for k in specimen.SpecimenCorrections.COLUMNS}
    return pd.DataFrame({
        "time_us": curves.time * 1e6,
        "strain_incident": waves.incident, "strain_reflected": waves.reflected,
        "strain_transmitted": waves.transmitted,
        "force_front_kN": curves.force_front / 1e3, "force_back_kN": curves.force_back / 1e3,
        "velocity_front_m_per_s": curves.velocity_front, "velocity_back_m_per_s": curves.velocity_back,
        "equilibrium_R": verdict.equilibrium_ratio, "equilibrium_R_limit": verdict.equilibrium_limit,
        "strain_rate_per_s": curves.strain_rate, "strain_rate_reflected_per_s": curves.strain_rate_reflected,
        "strain": curves.strain, "strain_from_reflected": curves.strain_from_reflected,
        "stress_1wave_MPa": sig["1-wave"] / 1e6, "stress_2wave_MPa": sig["2-wave"] / 1e6,
        "stress_3wave_MPa": sig["3-wave"] / 1e6, "stress_MPa": curves.stress / 1e6,
        "true_strain": curves.true_strain, "true_stress_MPa": curves.true_stress / 1e6,
        **extra,
        "valid": verdict.valid.astype(int),
        **(uncertainty.columns() if uncertainty is not None else {}),
    })


#: Which form each output column uses (written into every summary).
COLUMN_NOTES = {
    "strain_incident/reflected/transmitted": "bar strains moved to the specimen faces, compression positive",
    "force_front_kN": "F1 = E_i A_i (eps_i + eps_r), incident-bar face",
    "force_back_kN": "F2 = E_t A_t eps_t, transmitted-bar face",
    "equilibrium_R": "2 (F1 - F2) / (F1 + F2), averaged over 0.25 us as the equilibrium test reads it",
    "equilibrium_R_limit": "the limit |R| is tested against: the threshold widened by k u(R), u(R) propagated from "
                           "the records' noise (GUM, JCGM 100:2008 eq. 10)",
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
    "stress_inertia_dh_MPa": "stress_1wave_MPa + rho (L^2/6 - nu^2 D^2/8) d(strain_rate)/dt (Davies & Hunter 1963); "
                             "an estimate beside the stress, NaN without the specimen's density",
    "stress_inertia_gorham_MPa": "stress_MPa + the fuller inertia correction (Gorham 1989: face acceleration, "
                                 "current dimensions, radial strain-rate-squared term); NaN without the density",
    "stress_friction_MPa": "stress_MPa / (1 + mu D / (3 L)), current D and L (Siebel 1923): the friction-free end "
                           "of the band; NaN without friction_coefficient",
    "valid": "1 inside the loading part after force equilibrium",
    "u_stress_MPa, u_strain, u_strain_rate_per_s, u_true_stress_MPa": "standard uncertainty of the row's value "
    "(GUM law for the linear inputs, Monte Carlo through the stages for the rest; docs/uncertainty.md)",
    "U95_stress_MPa, U95_strain, U95_strain_rate_per_s": "expanded uncertainty U = k u, k = 2 (about 95 %)",
}


def _speed_source(barset, which) -> str:
    """Where a bar's wave speed came from: its calibration file, the bar set, or sqrt(E/rho)."""
    if f"{which}.wave_speed_m_per_s" in barset.calibration.get("applied", {}):
        return f"calibration ({barset.calibration.get('file')})"
    return "measured (bar set)" if getattr(barset, which).measured_wave_speed else "sqrt(E/rho)"


def _resolved(path) -> Optional[str]:
    """An input path as the summary gives it: absolute, symbolic links resolved (None stays None)."""
    return None if path is None else str(Path(path).resolve())


def _inputs(shot: Shot) -> dict:
    """The resolved setup, SI, for the summary; every input path absolute and resolved."""
    bs = shot.barset

    def bar(b: Bar, g: Gauge, stations=()):
        d = {"material": asdict(b.material), "diameter_m": b.diameter, "length_m": b.length,
             "measured_wave_speed_m_per_s": b.measured_wave_speed, "gauge": asdict(g)}
        if stations:  # further gauge stations (two-point separation)
            d["stations"] = [asdict(x) for x in stations]
        return d

    sp = shot.specimen
    return {
        "barset": {"name": bs.name, "source": _source(bs.source), "calibration": bs.calibration,
                   "incident": bar(bs.incident, bs.incident_gauge, bs.incident_stations),
                   "transmitted": bar(bs.transmitted, bs.transmitted_gauge, bs.transmitted_stations),
                   "striker": (asdict(bs.striker) if bs.striker else None)},
        "specimen": {"length_m": sp.length, "diameter_m": sp.diameter, "material": sp.material,
                     "temperature_K": sp.temperature, "modulus_Pa": sp.modulus, "density_kg_per_m3": sp.density,
                     "poisson_ratio": sp.poisson_ratio},
        "record": None if shot.record is None else {
            "incident": _resolved(shot.record.incident.file), "incident_column": shot.record.incident.column,
            "transmitted": _resolved(shot.record.transmitted.file),
            "transmitted_column": shot.record.transmitted.column,
            **{f"{b}_stations": [{"file": _resolved(c.file), "column": c.column} for c in getattr(shot.record,
                                                                                              f"{b}_stations")]
               for b in ("incident", "transmitted") if getattr(shot.record, f"{b}_stations")}},
        "analysis": asdict(shot.analysis),
        "striker_speed_m_per_s": shot.striker_speed,
        "source": _source(shot.source),
    }


def _source(source):
    """A shot file's path, absolute and resolved; a campaign row's name (``shots.csv line 3 (shot X)``) as it is."""
    if source is None:
        return None
    p = Path(str(source))
    return str(p.resolve()) if p.suffix.lower() == ".toml" and p.exists() else str(source)


def reduce_file(shot_path, out_dir=None, figure=True, announce=None, **analysis_changes) -> ShotResult:
    """Load a shot file (or take a :class:`Shot` already loaded), reduce it and (if ``out_dir``) write the result
    folder (``announce``: as in :func:`reduce_shot`)."""
    from .setup import load_shot, with_analysis

    shot = shot_path if isinstance(shot_path, Shot) else load_shot(shot_path)
    if analysis_changes:
        shot = with_analysis(shot, **analysis_changes)
    result = reduce_shot(shot, announce=announce)
    if out_dir is not None:
        result.write(out_dir, figure=figure)
    return result
