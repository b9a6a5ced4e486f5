"""Calibration files and figures: the file and figure edge of :mod:`shpb.calibrate`.

:mod:`shpb.calibrate` holds the pure calibration methods (wave speed, bars
together, striker check, shunt calibration). This module holds what touches
files or draws, and it alone knows the calibration-file format (described in
``docs/calibration.md``): where a bar set's calibration file lies
(:func:`calibration_path`), reading it (:func:`read_calibration`), validating
it and finding the latest value of each quantity (:func:`latest_values`,
which :func:`shpb.setup.apply_calibration_file` applies to a bar set),
building and appending entries (:func:`calibration_entry`,
:func:`append_calibration`), naming an entry's figure (:func:`figure_name`)
and the figures of each calibration (``plot_*``, each returning a
``matplotlib.figure.Figure``; matplotlib is imported only when one is drawn).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from .errors import InputError

# =========================================================================== calibration file
#: Suffix of a calibration file next to its bar set: ``<bar set stem>.calibration.toml``.
CALIBRATION_SUFFIX = ".calibration.toml"
#: Quantities a calibration entry may apply, per bar, in its ``apply`` table.
APPLY_KEYS = ("wave_speed_m_per_s", "scale", "scale_relative_to_incident")


def calibration_path(barset_path) -> Path:
    """The calibration file of a bar set: its ``calibration_file`` key, else ``<stem>.calibration.toml`` beside it."""
    from .setup import read_toml  # lazy: setup imports this module lazily too

    barset_path = Path(barset_path)
    data = read_toml(barset_path)
    name = data.get("calibration_file")
    if name is not None:
        if not isinstance(name, str):
            raise InputError(f"expected a file name, got {name!r}", f"{barset_path}: calibration_file")
        return barset_path.parent / name
    return barset_path.with_name(barset_path.stem + CALIBRATION_SUFFIX)


def read_calibration(path) -> list:
    """The entries of a calibration file, oldest first (empty when the file does not exist)."""
    path = Path(path)
    if not path.is_file():
        return []
    return _entries(path)


def _entries(path: Path) -> list:
    from .setup import read_toml  # lazy: setup imports this module lazily too

    entries = read_toml(path).get("calibration", [])
    if not isinstance(entries, list):
        raise InputError("expected [[calibration]] entries", str(path))
    return entries


def latest_values(path) -> dict:
    """What a calibration file applies: per bar and quantity, the value of the latest entry giving it.

    For each quantity (each bar's wave speed, each gauge's scale) the last
    entry in the file whose ``[calibration.apply.<bar>]`` table gives it wins
    ("latest" is last in the file: entries are appended in time order). The
    file is validated on the way: every entry must be a table whose
    ``apply`` table maps ``incident``/``transmitted`` to keys of
    :data:`APPLY_KEYS` with positive finite numbers.

    Parameters
    ----------
    path : str or Path
        The calibration file (it must exist).

    Returns
    -------
    dict
        ``{(bar, quantity): record}`` with ``bar`` ``"incident"`` or
        ``"transmitted"`` and ``quantity`` ``"wave_speed_m_per_s"`` [m/s] or
        ``"scale"`` [1]. A record is a dict: ``value``, ``entry`` (index in
        the file), ``date`` (str or None), ``kind``, ``inputs`` (files with
        their SHA-256) and, for a scale given relative to the incident
        channel's (``scale_relative_to_incident``, from a bars-together
        shot), ``relative_to_incident`` = ``value`` = that ratio: the caller
        multiplies it by the incident scale in effect. ``uncertainty``: the
        standard uncertainty of ``value`` the entry's results give
        (``wave_speed_uncertainty_m_per_s``, ``scale_uncertainty``), or None.

    Raises
    ------
    InputError
        Missing or malformed file, unknown bar or key, a value that is not a
        positive number; the message names the file and the entry.
    """
    path = Path(path)
    where = str(path)
    entries = _entries(path)
    latest = {}
    for i, e in enumerate(entries):
        if not isinstance(e, dict) or not isinstance(e.get("apply", {}), dict):
            raise InputError("expected a table with an 'apply' table", f"{where}: calibration[{i}]")
        for bar_name, table in e.get("apply", {}).items():
            if bar_name not in ("incident", "transmitted") or not isinstance(table, dict):
                raise InputError(f"expected [calibration.apply.incident] or .transmitted, got {bar_name!r}",
                                 f"{where}: calibration[{i}].apply")
            for key, value in table.items():
                if key not in APPLY_KEYS:
                    raise InputError(f"unknown key {key!r} (expected one of: {', '.join(APPLY_KEYS)})",
                                     f"{where}: calibration[{i}].apply.{bar_name}")
                if isinstance(value, bool) or not isinstance(value, (int, float)) or not value > 0 \
                        or not math.isfinite(value):
                    raise InputError(f"expected a positive number, got {value!r}",
                                     f"{where}: calibration[{i}].apply.{bar_name}.{key}")
                date = e.get("date")  # a hand-edited file may hold a TOML datetime: keep the summary JSON-able
                record = {"value": float(value), "entry": i, "date": None if date is None else str(date),
                          "kind": e.get("kind"), "inputs": e.get("inputs", []),
                          "uncertainty": _entry_uncertainty(e, key)}
                if key == "scale_relative_to_incident":
                    record["relative_to_incident"] = float(value)
                latest[(bar_name, "scale" if key.startswith("scale") else key)] = record
    return latest


#: The key of an entry's results holding the standard uncertainty of each quantity it may apply.
UNCERTAINTY_KEYS = {"wave_speed_m_per_s": "wave_speed_uncertainty_m_per_s", "scale": "scale_uncertainty",
                    "scale_relative_to_incident": "scale_relative_to_incident_uncertainty"}


def _entry_uncertainty(entry: dict, key: str):
    """The standard uncertainty an entry's results give for an applied quantity (None when none or not finite)."""
    value = (entry.get("results") or {}).get(UNCERTAINTY_KEYS.get(key, ""))
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value < 0:
        return None
    return float(value)


def calibration_entry(kind, results, *, inputs=(), base_dir=None, bar=None, apply=None, settings=None,
                      figure=None, date=None) -> dict:
    """One calibration entry (a mapping ready for TOML).

    Parameters
    ----------
    kind : str
        ``free-end``, ``flight``, ``bars-together``, ``striker`` or ``shunt``.
    results : dict
        Results with units in the key names.
    inputs : sequence of path
        Input files; each is stored with its SHA-256 (relative to ``base_dir`` when inside it).
    bar : str or None
        ``incident`` or ``transmitted`` when the entry is about one bar.
    apply : dict or None
        ``{bar: {key: value}}`` with keys from :data:`APPLY_KEYS`: what
        :func:`shpb.setup.load_barset` applies; empty for a check only.
    settings : dict or None
        Method parameters used.
    figure : str or None
        File name of the entry's figure.
    date : str or None
        ISO 8601 date and time (default now, UTC).
    """
    import datetime

    from .io import sha256_file, to_plain

    if date is None:
        date = datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")
    files = []
    for f in inputs:
        f = Path(f)
        name = str(f)
        if base_dir is not None:
            try:
                name = str(f.resolve().relative_to(Path(base_dir).resolve()))
            except ValueError:
                name = str(f.resolve())
        files.append({"file": name, "sha256": sha256_file(f)})
    for b, table in (apply or {}).items():
        if b not in ("incident", "transmitted"):
            raise ValueError(f"unknown bar {b!r} in apply")
        for k in table:
            if k not in APPLY_KEYS:
                raise ValueError(f"unknown apply key {k!r}")
    entry = {"date": date, "kind": kind, "bar": bar, "inputs": files, "figure": figure,
             "apply": apply or {}, "results": results, "settings": settings or {}}
    # TOML has no null: None is left out; NaN (e.g. an uncertainty not estimated) is kept, TOML writes nan
    return to_plain(entry, nonfinite="keep", none="omit")


def append_calibration(path, entry) -> None:
    """Append an entry to a calibration file (created if missing), atomically."""
    import tomli_w

    from .io import atomic_write_text

    path = Path(path)
    entries = read_calibration(path)
    entries.append(entry)
    head = ("# Bar-set calibration written by `shpb calibrate`; newest entry last.\n"
            "# load_barset applies, per quantity, the latest entry's [calibration.apply] values.\n\n")
    atomic_write_text(path, head + tomli_w.dumps({"calibration": entries}))


def figure_name(calibration_file, kind, bar=None, date=None) -> str:
    """File name of an entry's figure: ``<calibration stem>.<kind>[-<bar>].<YYYYmmddTHHMMSS>.png``."""
    import datetime

    stamp = (datetime.datetime.fromisoformat(date) if date else datetime.datetime.now(datetime.timezone.utc))
    stem = Path(calibration_file).name
    stem = stem[: -len(".toml")] if stem.endswith(".toml") else stem
    tag = f"{kind}-{bar}" if bar else kind
    return f"{stem}.{tag}.{stamp.strftime('%Y%m%dT%H%M%S')}.png"


# =========================================================================== figures
def _figure(nrows=2):
    from matplotlib.figure import Figure  # no pyplot: no global state, no screen needed

    fig = Figure(figsize=(8.6, 3.2 * nrows), layout="constrained")
    axes = fig.subplots(nrows, 1)
    return fig, np.atleast_1d(axes)


def _legend(ax):
    """The legend beside the panel, off the data (constrained layout makes room for it)."""
    from .report import legend_outside

    legend_outside(ax)


def plot_free_end(time, signal, result):
    """Figure of a free-end calibration: the record with its passes, and the aligned pulse and echoes.

    ``signal`` is the gauge's bar strain [1]; it is drawn in µε, the first pulse positive.
    """
    from .style import SHOT_COLOURS, shot_style

    fig, (ax1, ax2) = _figure(2)
    y = np.asarray(signal, float) * result["first_pulse_sign"]
    dt = time[1] - time[0]
    ax1.plot(time * 1e6, y * 1e6, lw=0.7, color="0.3", label="record")
    a, b = result["window"]
    ax1.axvspan(time[a] * 1e6, time[b - 1] * 1e6, color=SHOT_COLOURS[0], alpha=0.15, lw=0, label="pulse window")
    tau = (np.arange(a, b) - a) * dt * 1e6
    ax2.plot(tau, y[a:b] * 1e6, color="k", lw=1.2, label="pulse")
    for i, e in enumerate(result["echoes"]):
        k = int(round(e["delay_s"] / dt))
        ax1.axvspan(time[a + k] * 1e6, time[min(b + k, time.size) - 1] * 1e6, color=SHOT_COLOURS[1], alpha=0.12,
                    lw=0, label="passes used" if i == 0 else None)
        seg = e["sign"] * y[a + k : b + k]
        ax2.plot(tau[: seg.size], seg * 1e6, lw=0.8, color=shot_style(i)["color"],
                 label=f"pass {e['pass']} ({e['path_m']:.3f} m)")
    ax1.set(xlabel="record time [µs]", ylabel="bar strain [µε]\n(first pulse positive)",
            title=f"free-end shot: c0 = {result['wave_speed_m_per_s']:.1f} "
                  f"± {result['wave_speed_uncertainty_m_per_s']:.1f} m/s")
    _legend(ax1)
    ax2.set(xlabel="time in window [µs]", ylabel="bar strain [µε]\n(aligned, sign-corrected)")
    _legend(ax2)
    return fig


def plot_flight(lengths, delays, result):
    """Figure of a time-of-flight regression: delays against path length, and residuals."""
    fig, (ax1, ax2) = _figure(2)
    L = np.asarray(lengths, float)
    x = np.linspace(0, L.max() * 1.05, 50)
    ax1.plot(L, np.asarray(delays) * 1e6, "o", color="k", label="measured")
    ax1.plot(x, (x / result["wave_speed_m_per_s"] + result["intercept_s"]) * 1e6, "-", color="#0072B2",
             label=f"t = L/c + t0\nc = {result['wave_speed_m_per_s']:.1f} m/s\nt0 = {result['intercept_s'] * 1e6:.3f} µs")
    ax1.set(xlabel="path length [m]", ylabel="delay [µs]", title="time-of-flight regression")
    _legend(ax1)
    ax2.axhline(0, color="0.5", lw=0.8)
    ax2.plot(L, np.asarray(result["residuals_s"]) * 1e6, "o", color="k")
    ax2.set(xlabel="path length [m]", ylabel="residual [µs]")
    return fig


def plot_bars_together(time, strain_incident, strain_transmitted, result):
    """Figure of a bars-together shot: the two channels, and the pulses aligned."""
    from . import style

    fig, (ax1, ax2) = _figure(2)
    ax1.plot(time * 1e6, np.asarray(strain_incident) * 1e6, lw=0.7, color=style.INCIDENT, label="incident gauge")
    ax1.plot(time * 1e6, np.asarray(strain_transmitted) * 1e6, lw=0.7, color=style.TRANSMITTED,
             label="transmitted gauge")
    ax1.set(xlabel="record time [µs]", ylabel="raw bar strain [µε]",
            title=f"bars together: ratio {result['transmitted_to_incident_ratio']:.4f}, residual reflected "
                  f"{100 * result['reflected_peak_fraction']:.1f} %, c = {result['wave_speed_m_per_s']:.1f} m/s")
    _legend(ax1)
    a, b = result["window"]
    dt = time[1] - time[0]
    tau = np.arange(b - a) * dt * 1e6
    kt, kr = result["transmitted_lag_samples"], result["reflected_lag_samples"]
    si, stt = np.asarray(strain_incident), np.asarray(strain_transmitted)
    ax2.plot(tau, si[a:b] * 1e6, color="k", label="incident")
    ax2.plot(tau, stt[a + kt : b + kt] * 1e6, color=style.TRANSMITTED, label="transmitted (aligned)")
    ax2.plot(tau, si[a + kr : b + kr] * 1e6, color=style.REFLECTED, label="reflected (aligned)")
    ax2.set(xlabel="time in window [µs]", ylabel="raw bar strain [µε]")
    _legend(ax2)
    return fig


def plot_striker(time, strain, result):
    """Figure of a striker check: the incident pulse, its plateau and the expected level."""
    fig, (ax1,) = _figure(1)
    ax1.plot(time * 1e6, np.asarray(strain) * 1e6, lw=0.8, color="0.3", label="incident gauge")
    ax1.axhline(result["expected_strain"] * 1e6, color="#D55E00", ls="--",
                label=f"expected from the\nstriker speed: {result['expected_strain'] * 1e6:.1f} µε")
    ax1.axhline(result["measured_strain"] * 1e6, color="#0072B2", ls=":",
                label=f"measured plateau:\n{result['measured_strain'] * 1e6:.1f} µε")
    pad = 0.5 * (result["pulse_end_s"] - result["pulse_foot_s"])
    ax1.set_xlim((result["pulse_foot_s"] - pad) * 1e6, (result["pulse_end_s"] + pad) * 1e6)
    ax1.set(xlabel="record time [µs]", ylabel="raw bar strain [µε]", title=f"striker check: scale {result['scale']:.4f}")
    _legend(ax1)
    return fig


def plot_shunt(time, volts, result):
    """Figure of a shunt step and the two levels read from it."""
    fig, (ax1,) = _figure(1)
    ax1.plot(time * 1e3, volts, lw=0.7, color="0.3", label="channel")
    ax1.axhline(result["before_V"], color="#0072B2", ls="--", label=f"before {result['before_V']:.5g} V")
    ax1.axhline(result["after_V"], color="#D55E00", ls="--", label=f"after {result['after_V']:.5g} V")
    ax1.set(xlabel="record time [ms]", ylabel="channel [V]",
            title=f"shunt step {result['height_V']:.5g} V: scale {result.get('scale', float('nan')):.4f}")
    _legend(ax1)
    return fig
