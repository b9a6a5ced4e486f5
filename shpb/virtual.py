"""Virtual shot files: the file and figure edge of :mod:`shpb.simulate`.

:mod:`shpb.simulate` holds the 1-D model of a pressure-bar rig and the pure
array functions that turn a model run into a record. This module holds what
touches files or draws around them: reading a simulation setup file
(:func:`load_simulation`, format in ``docs/simulation.md``), planning,
simulating and recording the shot it describes (:func:`simulate_setup`), the
outputs' contents (:func:`record_csv_text`, :func:`shot_toml_text`,
:func:`truth_table`, ...), writing them (:func:`write_virtual_shot`) and the
figure (:func:`plot_virtual_shot`).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from pathlib import Path
from typing import Optional

import numpy as np

from .errors import InputError
from .setup import _Table, load_barset, read_toml
from .simulate import (TRIGGERS, TRUTH_COLUMNS, JohnsonCookLaw, PerfectlyPlastic, RecorderSpec, RodSpec, TrueStressLaw,
                       VirtualRecord, VirtualShotResult, VirtualShotSpec, bar_rod, check_plan, dispersed_drive,
                       model_duration, plan_shot, simulate_shot, trigger_time, virtual_record)
from .units import to_si

__all__ = [
    "SETUP_LAWS",
    "SHOT_KINDS",
    "OUTPUT_FILES",
    "RECORD_COLUMNS",
    "DISPERSION_LABELS",
    "SimulationSetup",
    "VirtualShot",
    "load_simulation",
    "simulate_setup",
    "TRUTH_COLUMNS",
    "truth_table",
    "record_csv_text",
    "record_metadata",
    "station_gauges",
    "station_channels",
    "shot_toml_text",
    "write_virtual_shot",
    "plot_virtual_shot",
]


# =========================================================================== setup file
#: Specimen and shaper laws a simulation setup file may name.
SETUP_LAWS = ("elastic", "perfectly-plastic", "johnson-cook")
#: Kinds of virtual shot a setup file may describe.
SHOT_KINDS = ("specimen", "bars-together", "free-end")
#: Names of the files ``write_virtual_shot`` writes (``{name}`` is the setup's name).
OUTPUT_FILES = {"record": "{name}.csv", "shot": "{name}.toml", "truth": "{name}_truth.csv", "figure": "{name}.png"}
#: Channel columns of a virtual record: time, the main gauges, then the further stations (``CH3``, ``CH4``, ...)
#: in the order of :func:`station_channels`.
RECORD_COLUMNS = ("TIME", "CH1", "CH2")
#: How the dispersion of a record is described in its metadata and figure.
DISPERSION_LABELS = {None: "none (non-dispersive bars)",
                     "specimen": "Pochhammer-Chree, each wave over its path from the specimen faces",
                     "impact": "Pochhammer-Chree, each wave over its path from the impact face"}


@dataclass(frozen=True)
class SimulationSetup:
    """A virtual shot as described by a simulation setup file (all SI).

    Attributes
    ----------
    name : str
    kind : str
        ``specimen``, ``bars-together`` or ``free-end`` (one of :data:`SHOT_KINDS`).
    spec : VirtualShotSpec
        The model input (striker, shaper, bars, specimen; duration set for the record).
    recorder : RecorderSpec
    barset : shpb.setup.BarSet
        The bar set the bars, gauges and striker come from.
    barset_path : Path
        Its file.
    dispersion : bool
        Pochhammer–Chree dispersion in the records.
    specimen : dict
        What the shot file needs about the specimen: ``material``,
        ``temperature`` [K] (or None), ``modulus`` [Pa], ``density`` [kg/m^3],
        and ``law`` (a description with its parameters, SI).
    yield_strength : float or None
        The lower of the incident bar's and the striker's yield strengths [Pa].
    source : str
        The setup file.
    """

    name: str
    kind: str
    spec: VirtualShotSpec
    recorder: RecorderSpec
    barset: object
    barset_path: Path
    dispersion: bool
    specimen: dict
    yield_strength: Optional[float]
    source: str


@dataclass
class VirtualShot:
    """A simulated shot ready to be written: setup, planning numbers, model result and record."""

    setup: SimulationSetup
    plan: dict
    result: VirtualShotResult
    record: VirtualRecord


def _law(t, modulus):
    """The constitutive law of a [specimen] or [shaper] table, and its description."""
    name = t.string("law", default="elastic", choices=SETUP_LAWS)
    measure = t.string("stress_measure", default="true", choices=("true", "engineering"))
    if name == "elastic":
        for key in ("yield_stress", "A", "B", "n", "C", "reference_rate"):
            if t.has(key):
                raise InputError(f"key {key!r} needs a plastic law (law = 'perfectly-plastic' or 'johnson-cook')",
                                 t._key(key))
        return None, {"law": "elastic"}
    if name == "perfectly-plastic":
        y = t.quantity("yield_stress", "pressure")
        law, desc = PerfectlyPlastic(y), {"law": name, "yield_stress_Pa": y}
    else:
        A = t.quantity("A", "pressure")
        B = t.quantity("B", "pressure", positive=False)
        n = t.quantity("n", "dimensionless")
        C = t.quantity("C", "dimensionless", positive=False)
        rate0 = t.quantity("reference_rate", "strain_rate", default=1.0)
        for key, val in (("B", B), ("C", C)):
            if val < 0:
                raise InputError(f"expected a value >= 0, got {t.data[key]!r}", t._key(key))
        law = JohnsonCookLaw(A, B, n, C, rate0)
        desc = {"law": name, "A_Pa": A, "B_Pa": B, "n": n, "C": C, "reference_rate_per_s": rate0}
    desc["stress_measure"] = measure
    if measure == "true":
        law = TrueStressLaw(law, modulus)
    return law, desc


_ROD_KEYS = {"diameter", "modulus", "density", "material", "law", "stress_measure", "yield_stress", "A", "B", "n",
             "C", "reference_rate", "elements"}


def _elements(t, default, minimum):
    value = t.data.get("elements", default)
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        raise InputError(f"expected a whole number of elements >= {minimum}, got {value!r}", t._key("elements"))
    return value


def _pair(t, key, parse, default):
    """A value for both channels, or a [incident, transmitted] list."""
    if not t.has(key):
        return (default, default)
    raw = t.data[key]
    if isinstance(raw, list):
        if len(raw) != 2:
            raise InputError(f"expected one value or a list of two (incident, transmitted), got {raw!r}", t._key(key))
        return tuple(parse(v, f"{t._key(key)}[{i}]") for i, v in enumerate(raw))
    value = parse(raw, t._key(key))
    return (value, value)


def _noise(value, where):
    """Noise std: ``"2 mV"`` -> (volts, 0); ``"3 microstrain"`` -> (0, strain); 0 -> (0, 0)."""
    if isinstance(value, (int, float)) and not isinstance(value, bool) and value == 0:
        return (0.0, 0.0)
    if not isinstance(value, str):
        raise InputError(f"expected a noise level with its unit ('2 mV' or '3 microstrain'), got {value!r}", where)
    try:
        out = (to_si(value, "voltage", where), 0.0)
    except InputError:
        try:
            out = (0.0, to_si(value, "dimensionless", where))
        except InputError:
            raise InputError(f"expected volts ('2 mV') or strain ('3 microstrain'), got {value!r}", where) from None
    if min(out) < 0:
        raise InputError(f"expected a noise level >= 0, got {value!r}", where)
    return out


def load_simulation(path) -> SimulationSetup:
    """Load a simulation setup file (format in ``docs/simulation.md``).

    Every error names the file and the key. The bars, gauges and (by default)
    the striker come from the bar set the file names (:func:`shpb.setup.load_barset`).
    The model bars take the bar set's modulus and wave speed (the measured
    one when the bar set or its calibration gives one; density E / c0**2).
    """
    path = Path(path)
    src = str(path)
    data = read_toml(path)
    top = _Table(data, f"{src}:")
    top.check_keys({"name", "kind", "barset", "dispersion", "striker", "specimen", "shaper", "recorder"})
    name = top.string("name", default=path.stem)
    if not name or any(c in name for c in '/\\:*?"<>|'):
        raise InputError(f"name {name!r} cannot be a file name", f"{src}: name")
    kind = top.string("kind", default="specimen" if "specimen" in data else "bars-together", choices=SHOT_KINDS)
    barset_path = path.parent / top.string("barset")
    bs = load_barset(barset_path)

    # striker: the bar set's, with overrides
    st = top.table("striker", required=False) or _Table({}, f"{src}: striker")
    st.check_keys({"speed", "length", "diameter", "modulus", "density"})
    base = bs.striker
    mat = base.material if base else bs.incident.material
    speed = st.quantity("speed", "velocity", required=False, default=base.speed if base else None)
    if speed is None:
        raise InputError("missing key 'speed' (the striker speed, e.g. '15 m/s'; or give it in the bar set)", st.where)
    if base is None and not st.has("length"):
        raise InputError("missing key 'length' (the bar set describes no striker)", st.where)
    s_modulus = st.quantity("modulus", "pressure", default=mat.modulus)
    striker = RodSpec(st.quantity("length", "length", default=base.length if base else None),
                      st.quantity("diameter", "length", default=base.diameter if base else bs.incident.diameter),
                      s_modulus, st.quantity("density", "density", default=mat.density))
    yields = [y for y in (bs.incident.material.yield_strength, mat.yield_strength if not st.has("modulus") else None)
              if y]

    specimen, info = None, {}
    sp = top.table("specimen", required=False)
    if kind == "specimen":
        if sp is None:
            raise InputError("missing table [specimen] (or set kind = 'bars-together' / 'free-end')", f"{src}:")
        sp.check_keys(_ROD_KEYS | {"length", "temperature"})
        modulus = sp.quantity("modulus", "pressure")
        law, desc = _law(sp, modulus)
        specimen = RodSpec(sp.quantity("length", "length"), sp.quantity("diameter", "length"), modulus,
                           sp.quantity("density", "density"), law)
        if specimen.diameter > bs.incident.diameter:
            raise InputError(f"specimen diameter {specimen.diameter * 1e3:g} mm exceeds the bar diameter "
                             f"{bs.incident.diameter * 1e3:g} mm", sp._key("diameter"))
        info = {"material": str(sp.data.get("material", "")),
                "temperature": sp.quantity("temperature", "temperature", required=False),
                "modulus": modulus, "density": specimen.density, "law": desc}
        elements = _elements(sp, 20, 20)
    elif sp is not None:
        raise InputError(f"a {kind} shot has no specimen: remove [specimen] or set kind = 'specimen'", sp.where)
    else:
        elements = 20

    shaper = None
    sh = top.table("shaper", required=False)
    shaper_elements = 10
    if sh is not None:
        sh.check_keys(_ROD_KEYS | {"thickness"})
        modulus = sh.quantity("modulus", "pressure")
        law, _ = _law(sh, modulus)
        shaper = RodSpec(sh.quantity("thickness", "length"), sh.quantity("diameter", "length"), modulus,
                         sh.quantity("density", "density"), law)
        shaper_elements = _elements(sh, 10, 4)

    rt = top.table("recorder", required=False) or _Table({}, f"{src}: recorder")
    rt.check_keys({"sample_rate", "duration", "pre_trigger", "trigger", "bits", "range", "noise", "offset", "seed",
                   "stations"})
    bits = rt.data.get("bits", 12)
    if bits is not None and (isinstance(bits, bool) or not isinstance(bits, int) or not 2 <= bits <= 24):
        raise InputError(f"expected a whole number of bits from 2 to 24, got {bits!r}", rt._key("bits"))
    seed = rt.data.get("seed")
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, int) or seed < 0):
        raise InputError(f"expected a whole number >= 0, got {seed!r}", rt._key("seed"))
    noise = _pair(rt, "noise", _noise, (0.0, 0.0))
    recorder = RecorderSpec(
        sample_rate=rt.quantity("sample_rate", "frequency", default=10e6),
        duration=rt.quantity("duration", "time", default=0.8e-3),
        pre_trigger=rt.quantity("pre_trigger", "time", default=100e-6, positive=False),
        trigger=rt.string("trigger", default="incident-gauge", choices=TRIGGERS),
        bits=bits,
        full_scale=_pair(rt, "range", lambda v, w: _positive(to_si(v, "voltage", w), v, w), 5.0),
        noise_volts=(noise[0][0], noise[1][0]),
        noise_strain=(noise[0][1], noise[1][1]),
        offset=_pair(rt, "offset", lambda v, w: to_si(v, "voltage", w), 0.0),
        seed=seed,
    )
    if recorder.pre_trigger < 0:
        raise InputError("expected a time >= 0", rt._key("pre_trigger"))

    transmitted = None if kind == "free-end" else bar_rod(bs.transmitted)
    stations = rt.boolean("stations", True)  # record the bar set's further gauge stations
    spec = VirtualShotSpec(striker=striker, incident=bar_rod(bs.incident), transmitted=transmitted,
                           specimen=specimen, striker_speed=speed,
                           incident_gauge_distance=bs.incident_gauge.distance,
                           transmitted_gauge_distance=bs.transmitted_gauge.distance,
                           duration=1.0, sample_rate=recorder.sample_rate, shaper=shaper,
                           specimen_elements=elements, shaper_elements=shaper_elements,
                           incident_stations=tuple(g.distance for g in bs.incident_stations) if stations else (),
                           transmitted_stations=tuple(g.distance for g in bs.transmitted_stations)
                           if stations and transmitted is not None else ())
    try:
        duration = model_duration(trigger_time(spec, recorder), recorder)
    except InputError as exc:  # name the setup file's key, not the dataclass field
        raise InputError(exc.bare_message, rt._key("duration")) from None
    spec = dataclasses.replace(spec, duration=duration)
    return SimulationSetup(name=name, kind=kind, spec=spec, recorder=recorder, barset=bs, barset_path=barset_path,
                           dispersion=top.boolean("dispersion", True), specimen=info,
                           yield_strength=min(yields) if yields else None, source=src)


def _positive(value, raw, where):
    if not value > 0:
        raise InputError(f"expected a positive value, got {raw!r}", where)
    return value


def simulate_setup(setup: SimulationSetup, *, allow_bar_yield=False) -> VirtualShot:
    """Plan, simulate and record the virtual shot a setup describes.

    Refuses (InputError naming the file and ``striker.speed``) a striker speed
    whose incident bar stress reaches the yield strength, unless
    ``allow_bar_yield``. With dispersion, a specimen shot is driven by the
    striker's pulse dispersed over the incident bar (:func:`dispersed_drive`)
    and recorded with each wave dispersed over its path from the specimen
    faces; a calibration shot (no specimen) is recorded with each wave
    dispersed over its whole path from the impact face.
    """
    spec, rec, bs = setup.spec, setup.recorder, setup.barset
    plan = plan_shot(spec, setup.yield_strength)
    check_plan(plan, allow_bar_yield, f"{setup.source}: striker.speed")
    trigger = trigger_time(spec, rec)
    nu_i, nu_t = bs.incident.poisson_ratio, bs.transmitted.poisson_ratio
    mode = None
    if setup.dispersion and setup.kind == "specimen":
        run = dispersed_drive(spec, nu_i)
        lead = run.incident_pulse.impact_time
        run = dataclasses.replace(run, duration=spec.duration + lead)
        trigger += lead
        mode = "specimen"
    else:
        run = spec
        if setup.dispersion:
            mode = "impact"
    result = simulate_shot(run)
    record = virtual_record(result, rec, bs.incident_gauge,
                            None if setup.kind == "free-end" else bs.transmitted_gauge,
                            incident_poisson_ratio=nu_i, transmitted_poisson_ratio=nu_t, dispersion=mode, trigger=trigger,
                            station_gauges=station_gauges(bs, spec))
    return VirtualShot(setup=setup, plan=plan, result=result, record=record)


def station_gauges(barset, spec: VirtualShotSpec) -> dict:
    """Station name (:func:`shpb.io.station_name`) -> Gauge of the further stations a virtual shot records."""
    from .io import station_name

    out = {}
    for bar in ("incident", "transmitted"):
        for k, gauge in enumerate(getattr(barset, f"{bar}_stations")[:len(getattr(spec, f"{bar}_stations"))], start=2):
            out[station_name(bar, k)] = gauge
    return out


def station_channels(record: VirtualRecord) -> dict:
    """Station name -> its column in the record file: ``CH3``, ``CH4``, ... in the record's order."""
    return {name: f"CH{k}" for k, name in enumerate(record.volts_stations, start=3)}


# =========================================================================== outputs
#: Time [s] the truth table keeps ahead of the incident foot and past the loading (:func:`truth_table`).
TRUTH_MARGIN = 20e-6


def truth_table(result: VirtualShotResult, record: Optional[VirtualRecord] = None, *, before=TRUTH_MARGIN,
                after=TRUTH_MARGIN):
    """The specimen truth over its loading: from ``before`` [s] ahead of the incident foot's arrival to
    ``after`` [s] past the last face force above 1 % of its peak before the forces are first back at 1 %
    after the peak (within the record).

    The first return, not the last time a force exceeds 1 % in the whole record: after unloading, the specimen
    rattles between the bars' faces in contact blips of a few tenths of a percent of the peak, now and then above
    1 %, whose timing changes with round-off; the table would end wherever the last of them fell.

    Columns (units in the names, reduction time origin): ``time_us``,
    ``stress_MPa``, ``strain``, ``strain_rate_per_s``, ``force_front_kN``,
    ``force_back_kN``; engineering values, compression positive.
    """
    import pandas as pd

    return pd.DataFrame(_truth_rows(result, record, before, after), columns=list(TRUTH_COLUMNS))


def _truth_rows(result, record, before, after):
    """The rows of :func:`truth_table` as one array (columns :data:`TRUTH_COLUMNS`), without pandas."""
    truth = result.truth_columns
    force = np.maximum(np.abs(truth["force_front_kN"]), np.abs(truth["force_back_kN"]))
    t = truth["time_us"]
    end = t[-1]
    if np.isfinite(force).any():  # (a free-end shot has no face forces)
        peak = int(np.nanargmax(force))
        back = np.flatnonzero(force[peak:] <= 0.01 * force[peak])
        if back.size:  # the last sample above 1 % before that
            end = t[peak + max(back[0] - 1, 0)] + after * 1e6
    if record is not None:  # the record's last sample on the reduction's time origin
        end = min(end, (record.time[-1] + record.trigger_time - result.foot_arrival_time) * 1e6)
    keep = (t >= -before * 1e6) & (t <= end)
    return np.column_stack([np.asarray(truth[name], dtype=float)[keep] for name in TRUTH_COLUMNS])


def record_csv_text(record: VirtualRecord, metadata=()) -> str:
    """A record as a scope would export it: ``key,value`` metadata lines, then ``TIME,CH1[,CH2,CH3...]`` and the
    samples (the further stations after the main gauges, :func:`station_channels`).

    Time in seconds (``%.6e``), volts with five significant digits (below
    the converter's step).
    """
    import io as _io

    cols = [record.time, record.volts_incident]
    names = list(RECORD_COLUMNS[:2])
    if record.volts_transmitted is not None:
        cols.append(record.volts_transmitted)
        names.append(RECORD_COLUMNS[2])
    for name, column in station_channels(record).items():
        cols.append(record.volts_stations[name])
        names.append(column)
    buf = _io.StringIO()
    for key, value in metadata:
        buf.write(f"{key},{value}\n")
    buf.write(",".join(names) + "\n")
    np.savetxt(buf, np.column_stack(cols), delimiter=",", fmt=["%.6e"] + ["%.5g"] * (len(cols) - 1))
    return buf.getvalue()


def _q(value, unit, scale, fmt=".6g"):
    return f'"{format(value / scale, fmt)} {unit}"'


def shot_toml_text(shot: VirtualShot, record_file: str, barset_file: str, window: Optional[float] = None) -> str:
    """A ready-to-reduce shot file (``docs/setup-files.md``) for a virtual specimen shot."""
    s = shot.setup
    sp, info = s.spec.specimen, s.specimen
    law = ", ".join(f"{k} = {v:.6g}" if isinstance(v, float) else f"{k} = {v}" for k, v in info["law"].items())
    lines = [
        f"# Virtual shot written by `shpb simulate` from {Path(s.source).name} - SYNTHETIC DATA.",
        f"# Specimen law put in: {law}.",
        f"# Striker {s.spec.striker.length:.4g} m at {s.spec.striker_speed:.4g} m/s; dispersion in the record: "
        f"{'on' if s.dispersion else 'off'}. The truth table is beside the record.",
        f'name = "{s.name}"',
        f'barset = "{barset_file}"',
        "",
        "[specimen]",
        f"length = {_q(sp.length, 'mm', 1e-3)}",
        f"diameter = {_q(sp.diameter, 'mm', 1e-3)}",
        f'material = "{info["material"]}"',
    ]
    if info.get("temperature") is not None:
        lines.append(f"temperature = {_q(info['temperature'], 'K', 1.0)}")
    lines += [f"modulus = {_q(info['modulus'], 'GPa', 1e9)}", f"density = {_q(info['density'], 'kg/m^3', 1.0)}",
              "", "[striker]", f"speed = {_q(s.spec.striker_speed, 'm/s', 1.0, '.4g')}",
              "", "[record]", f'file = "{record_file}"', 'incident = "CH1"', 'transmitted = "CH2"', 'time = "TIME"']
    columns = station_channels(shot.record)
    for bar in ("incident", "transmitted"):
        mapped = [f'"{c}"' for name, c in columns.items() if name.startswith(f"{bar}_")]
        if mapped:
            lines.append(f"{bar}_stations = [{', '.join(mapped)}]")
    lines += ["", "[analysis]", "dispersion = true"]
    if window is not None:
        lines.append(f"window = {_q(window, 'us', 1e-6, '.1f')}")
    return "\n".join(lines) + "\n"


def record_metadata(shot: VirtualShot) -> list:
    """``(key, value)`` metadata lines of a virtual record: instrument, setup, sample interval, trigger, ..."""
    s, rec = shot.setup, shot.record
    r = s.recorder
    return [("Instrument", "shpb virtual recorder - SYNTHETIC DATA (not a measurement)"),
            ("Setup", Path(s.source).name),
            ("Sample interval", f"{1 / r.sample_rate:.6g} s"),
            ("Trigger", f"{r.trigger}; record starts {r.pre_trigger * 1e6:.6g} us before it"),
            ("Vertical", f"{r.bits} bit over +/-{r.full_scale[0]:.6g} V" if r.bits else "not quantised"),
            ("Dispersion", DISPERSION_LABELS[rec.info["dispersion"]])] + _channel_lines(shot)


def _channel_lines(shot: VirtualShot) -> list:
    """A ``Channels`` metadata line saying where each channel's station is (only for a record with further
    stations; a two-channel record keeps the usual CH1 incident, CH2 transmitted)."""
    columns = station_channels(shot.record)
    if not columns:
        return []
    bs, res = shot.setup.barset, shot.result
    parts = [f"CH1 incident gauge at {bs.incident_gauge.distance * 1e3:g} mm",
             f"CH2 transmitted gauge at {bs.transmitted_gauge.distance * 1e3:g} mm"]
    parts += [f"{c} {res.stations[n]['bar']} station at {res.stations[n]['distance_m'] * 1e3:g} mm"
              for n, c in columns.items()]
    return [("Channels", "; ".join(parts) + " (distances from the specimen faces)")]


def write_virtual_shot(shot: VirtualShot, out_dir, *, figure=True) -> dict:
    """Write a virtual shot into ``out_dir``, atomically.

    Files (``{name}`` the setup's name): the record ``{name}.csv`` (scope
    style: metadata lines, then ``TIME,CH1,CH2``); for a specimen shot, the
    ready-to-reduce shot file ``{name}.toml`` (bar set by relative path,
    default analysis window) and the truth table
    ``{name}_truth.csv`` (:func:`truth_table`); the figure ``{name}.png``
    (gauge strains, face forces, specimen stress) if ``figure``.

    Returns
    -------
    dict
        ``record``, ``shot``, ``truth``, ``figure`` -> Path (those written).
    """
    import os

    from .io import atomic_savefig, atomic_write_table, atomic_write_text

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    name = shot.setup.name
    paths = {k: out / v.format(name=name) for k, v in OUTPUT_FILES.items()}
    written = {}
    atomic_write_text(paths["record"], record_csv_text(shot.record, record_metadata(shot)))
    written["record"] = paths["record"]
    if shot.setup.kind == "specimen":
        # truth_table's rows, written without pandas
        atomic_write_table(paths["truth"], TRUTH_COLUMNS,
                           _truth_rows(shot.result, shot.record, TRUTH_MARGIN, TRUTH_MARGIN), float_format="%.6g")
        written["truth"] = paths["truth"]
        rel = Path(os.path.relpath(Path(shot.setup.barset_path).resolve(), out.resolve())).as_posix()
        atomic_write_text(paths["shot"], shot_toml_text(shot, paths["record"].name, rel))
        written["shot"] = paths["shot"]
    if figure:
        atomic_savefig(plot_virtual_shot(shot), paths["figure"], dpi=100)
        written["figure"] = paths["figure"]
    return written


# =========================================================================== figure
def plot_virtual_shot(shot: VirtualShot):
    """Figure of a virtual shot: bar strains at the gauges, face forces, specimen stress.

    Returns a ``matplotlib.figure.Figure`` built without pyplot (no backend
    or global state touched); :func:`write_virtual_shot` saves it. The panels
    sit on a fixed layout with room on the right for the widest legend, so
    that saving draws the figure once (a constrained layout draws it twice).
    """
    from matplotlib.figure import Figure  # no pyplot: the user's backend and figure list stay as they are

    from . import style
    from .report import legend_outside, outside_legend_width, wrapped_title

    rec, res, s = shot.record, shot.result, shot.setup
    has_specimen = s.kind == "specimen"
    width, height = 9.0, (9.5 if has_specimen else 3.8)
    fig = Figure(figsize=(width, height))
    axes = fig.subplots(3 if has_specimen else 1, 1, squeeze=False)
    ax = axes[0, 0]
    ax.plot(rec.time * 1e6, rec.strain_incident * 1e6, lw=0.8, color=style.INCIDENT, label="incident-bar gauge")
    if rec.strain_transmitted is not None:
        ax.plot(rec.time * 1e6, rec.strain_transmitted * 1e6, lw=0.8, color=style.TRANSMITTED,
                label="transmitted-bar gauge")
    for name, column in station_channels(rec).items():  # further stations: dashed, in their bar's colour
        station = res.stations[name]
        ax.plot(rec.time * 1e6, rec.strain_stations[name] * 1e6, lw=0.6, ls="--",
                color=style.INCIDENT if station["bar"] == "incident" else style.TRANSMITTED,
                label=f"{station['bar']}-bar station at {station['distance_m'] * 1e3:g} mm ({column})")
    ax.set(xlabel="record time [µs]", ylabel="bar strain [µε] (compression +)")
    legend_outside(ax)
    if has_specimen:
        # the model truth over the loading, from its arrays (no table library: pandas costs a fresh process 0.2 s)
        tt = dict(zip(TRUTH_COLUMNS, _truth_rows(res, rec, TRUTH_MARGIN, TRUTH_MARGIN).T))
        ax = axes[1, 0]
        ax.plot(tt["time_us"], tt["force_front_kN"], color=style.INCIDENT, label="front face F1\n(incident bar)")
        ax.plot(tt["time_us"], tt["force_back_kN"], "--", color=style.TRANSMITTED,
                label="back face F2\n(transmitted bar)")
        ax.set(xlabel="time from the incident foot at the specimen [µs]", ylabel="force [kN]",
               title="Face forces (model truth)")
        legend_outside(ax)
        ax = axes[2, 0]
        upto = int(np.argmax(tt["strain"])) + 1
        strain, stress = tt["strain"][:upto], tt["stress_MPa"][:upto]
        ax.plot(strain, stress, "k", label="engineering\n(model truth)")
        ax.plot(-np.log1p(-strain), stress * (1 - strain), color=style.REFLECTED, lw=0.8,
                label="true (volume\nconstant)")
        ax.set(xlabel="strain [1]", ylabel="stress [MPa]", title="Specimen stress (model truth)")
        legend_outside(ax)
    # the fixed layout [inches]: the widest legend on the right, the y labels on the left, the titles above and
    # the x labels below each panel
    legend = outside_legend_width(axes.flat)
    left, right, bottom, gap = 0.85, legend + 0.2, 0.55, 0.8
    title = wrapped_title(axes[0, 0], f"Gauge strains in the record (before noise and quantisation; dispersion: "
                                      f"{DISPERSION_LABELS[rec.info['dispersion']]})", fontsize=10,
                          width_inches=width - left - right)
    top = 0.42 + 0.17 * (title.get_text().count("\n") + 1)  # the figure's title, then the panel's lines of 10 pt
    rows = axes.shape[0]
    panel = (height - top - bottom - gap * (rows - 1)) / rows
    fig.subplots_adjust(left=left / width, right=1 - right / width, top=1 - top / height, bottom=bottom / height,
                        hspace=gap / panel)
    fig.suptitle(f"Virtual shot {s.name} - SYNTHETIC (shpb simulate)", fontsize=10, y=1 - 0.08 / height, va="top")
    return fig
