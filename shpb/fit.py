"""Constitutive-model fitting: load reduced curves, prepare, fit, write.

The flow, from the outside in:

1. :func:`load_curves` reads shot result folders (``curves.csv`` +
   ``summary.json``), campaign output folders (``shots/<id>/``) and optional
   quasi-static reference CSV files; keeps rows with ``valid == 1``; turns
   true strain into plastic strain, ε_p = ε_true − σ_true/E; and resamples
   every curve on one common plastic-strain grid.
2. :func:`with_adiabatic_heating` (optional) adds the Taylor–Quinney
   temperature rise along each shot curve.
3. :func:`fit_curves` fits one model of :data:`shpb.models.MODELS` to all
   curves at once (lmfit, bounded least squares), after checking which
   parameters the data can identify; optionally also the staged
   Johnson–Cook route for comparison.
4. :func:`write_fit` writes parameters (JSON, TOML), tabulated model curves
   for simulation codes (CSV), the data with residuals (CSV) and a figure
   sheet (PNG), each file atomically.

SI inside (Pa, 1/s, K); output keys and columns carry their unit.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd

from . import __version__
from .errors import AnalysisError, InputError
from .fit_uncertainty import DEFAULT_DRAWS, DEFAULT_SEED, BootstrapResult, bootstrap
from .models import ModelSpec, adiabatic_temperature_rise, evaluate, get_model
from .reduce import ShotResult
from .io import atomic_savefig, atomic_write_csv, atomic_write_text, to_plain
from .units import to_si

__all__ = [
    "ROOM_TEMPERATURE",
    "Curve",
    "CurveList",
    "load_curves",
    "read_quasi_static",
    "apparent_modulus",
    "plastic_strain_from_total",
    "resample_curves",
    "with_adiabatic_heating",
    "ParameterResult",
    "CurveStats",
    "FitResult",
    "parse_fixed",
    "fit_curves",
    "tabulate",
    "fit_report",
    "fit_to_dict",
    "write_fit",
    "plot_fit",
]

#: Room temperature assumed where a shot gives none [K].
ROOM_TEMPERATURE = 293.15

#: Default plastic-strain grid step [1].
GRID_STEP = 0.005

# Curves whose typical stresses differ by more than this factor were almost
# certainly written in different units (Pa vs MPa differ by 1e6, MPa vs GPa by
# 1e3); real rate and temperature effects stay well below it.
_MIXED_UNIT_RATIO = 200.0

# MINPACK stopping tolerances, tighter than lmfit's 1.5e-8 defaults: poorly
# determined parameters sit on a flat minimum and would otherwise stop early
# (costs a few more evaluations on these small problems).
_TOLERANCES = {"xtol": 1e-11, "ftol": 1e-11}


# --------------------------------------------------------------------------
# Curves
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class Curve:
    """One flow curve ready for fitting.

    Attributes
    ----------
    name : str
        Shot id or file stem.
    plastic_strain : numpy.ndarray
        True plastic strain, increasing [1].
    stress : numpy.ndarray
        True stress at those strains [Pa].
    strain_rate : float
        Mean strain rate of the curve [1/s].
    temperature : float
        Initial (test) temperature [K].
    material : str
        Specimen material as written in the summary ("" if unknown).
    source : str
        Folder or file the curve came from.
    modulus : float or None
        Modulus used for ε_p = ε_true − σ/E [Pa] (None if the file gave
        plastic strain directly).
    modulus_source : str
        ``"summary"``, ``"option"``, ``"file header"``, ``"fitted from elastic part"``
        or ``"plastic strain given"``.
    kind : str
        ``"shot"`` or ``"quasi-static"``.
    density : float or None
        Specimen density from the summary [kg/m³], for adiabatic heating.
    temperature_rise : numpy.ndarray or None
        Adiabatic temperature rise along the curve [K], if applied.
    notes : tuple of str
        What was assumed while loading.
    stress_u : numpy.ndarray or None
        Standard uncertainty of the stress at each point [Pa], from the
        file's ``u_<stress column>`` (the reduction's uncertainty columns);
        None when the file has none.
    stress_column : str
        The file's stress column that was read (``"true_stress_MPa"``).
    shared_group : str
        The bar set the shot was reduced with (its file and name): curves of
        one group share its calibration errors ("" for a reference curve).
    shared_stress_u, shared_strain_u : float or None
        Relative standard uncertainty [1] of the stress and of the strain
        (and strain rate) that the bar set's inputs cause, from the shot's
        uncertainty budget (``uncertainty.relative_by_group`` of its
        summary); None when the shot was reduced without it.
    node_weight : numpy.ndarray or None
        Quadrature weight of each point [1, grid steps of plastic strain it
        stands for], set by :func:`resample_curves`: 1 inside the curve,
        less at its ends, so that a fit's sum of squares is the same integral
        over the curve on any grid; None: every point 1 (raw samples).
    """

    name: str
    plastic_strain: np.ndarray
    stress: np.ndarray
    strain_rate: float
    temperature: float
    material: str = ""
    source: str = ""
    modulus: float | None = None
    modulus_source: str = ""
    kind: str = "shot"
    density: float | None = None
    temperature_rise: np.ndarray | None = None
    notes: tuple = ()
    stress_u: np.ndarray | None = None
    stress_column: str = ""
    shared_group: str = ""
    shared_stress_u: float | None = None
    shared_strain_u: float | None = None
    node_weight: np.ndarray | None = None

    @property
    def temperatures(self) -> np.ndarray:
        """Temperature at each point, initial plus any adiabatic rise [K]."""
        base = np.full(self.plastic_strain.shape, float(self.temperature))
        return base if self.temperature_rise is None else base + self.temperature_rise


class CurveList(list):
    """A list of :class:`Curve` with ``notes``: what was skipped or assumed while loading."""

    def __init__(self, curves=(), notes=()):
        super().__init__(curves)
        self.notes = list(notes)


def apparent_modulus(strain, stress, window_fraction=0.03):
    """Elastic slope of a loading curve: the steepest windowed regression before the peak.

    Parameters
    ----------
    strain : array_like
        True (or engineering) strain in time order [1].
    stress : array_like
        Stress at the same samples [Pa].
    window_fraction : float
        Window length as a fraction of the samples from 5 % of peak stress
        up to the peak [1] (at least 5 samples).

    Returns
    -------
    float
        Slope dσ/dε of the steepest window [Pa].

    Notes
    -----
    The elastic part is the steepest part of a loading curve, so the largest
    least-squares slope over sliding windows, from the first sample above 5 %
    of the peak stress up to the peak, picks it even when yield comes early
    (common practice). In a bar test the specimen is
    not yet in equilibrium there, so this is an *apparent* modulus, usually
    below the material's; it is consistent with the measured curve, which is
    what the plastic-strain offset needs.
    """
    eps = np.asarray(strain, float)
    sig = np.asarray(stress, float)
    ok = np.isfinite(eps) & np.isfinite(sig)
    eps, sig = eps[ok], sig[ok]
    if eps.size < 5:
        return float("nan")
    upto = int(np.argmax(sig)) + 1
    # From the first sample above 5 % of the peak: before it, strain and
    # stress are both noise about zero and their ratio means nothing.
    start = int(np.argmax(sig[:upto] > 0.05 * sig[upto - 1]))
    eps, sig = eps[start:upto], sig[start:upto]
    w = max(5, int(round(window_fraction * eps.size)))
    if eps.size < w:
        return float("nan")
    # Windowed least-squares slopes from cumulative sums (O(N)).
    c = lambda a: np.concatenate(([0.0], np.cumsum(a)))  # noqa: E731
    sx, sy, sxx, sxy = c(eps), c(sig), c(eps * eps), c(eps * sig)
    SX, SY = sx[w:] - sx[:-w], sy[w:] - sy[:-w]
    SXX, SXY = sxx[w:] - sxx[:-w], sxy[w:] - sxy[:-w]
    den = w * SXX - SX**2
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(den > 0, (w * SXY - SX * SY) / den, np.nan)
    return float(np.nanmax(slope)) if np.any(np.isfinite(slope)) else float("nan")


def plastic_strain_from_total(true_strain, true_stress, modulus):
    """Plastic strain ε_p = ε_true − σ_true/E.

    Parameters
    ----------
    true_strain : array_like
        True (logarithmic) strain [1].
    true_stress : array_like
        True stress [Pa].
    modulus : float
        Young's modulus of the specimen [Pa].

    Returns
    -------
    numpy.ndarray
        Plastic strain [1].

    Notes
    -----
    Additive split of elastic and plastic strain, common practice for metals
    whose elastic strains are ≪ 1.
    """
    return np.asarray(true_strain, float) - np.asarray(true_stress, float) / modulus


def _node_values(eps, sig, nodes, step, width):
    """Each node's stress: the intercept of a least-squares quadratic through the samples within ±width/2.

    Windows with fewer than 6 samples, or with no sample beyond a quarter
    step on one side of the node, take linear interpolation between
    neighbouring samples (no extrapolation).
    """
    out = np.interp(nodes, eps, sig)
    first = np.searchsorted(eps, nodes - width / 2.0 * (1 + 1e-12), side="left")
    last = np.searchsorted(eps, nodes + width / 2.0 * (1 + 1e-12), side="right")
    for i, (a, b) in enumerate(zip(first, last)):
        if b - a < 6:
            continue
        x = (eps[a:b] - nodes[i]) / width
        if x.min() > -0.25 * step / width or x.max() < 0.25 * step / width:
            continue
        coef, *_ = np.linalg.lstsq(np.column_stack([np.ones_like(x), x, x * x]), sig[a:b], rcond=None)
        out[i] = coef[0]
    return out


def _resample_one(eps, sig, step, window=None):
    """Stress at the grid nodes k·step inside the data's plastic-strain range, and at its two ends.

    Each node stands for its cell of the curve, [node − step/2, node + step/2]
    cut to the data's range [ε_first, ε_last] (ε_first at least half the
    ``window``: plastic strains below it are the yield transition, left out
    on every grid as the default grid always did), and weighs by the cell's
    length in steps (1 inside, 0.5 to 1 at the first and last grid node).
    Where the range reaches more than half a step beyond the first (last)
    grid node, that end piece gets a node of its own at its middle, weighing
    by its length: the cells tile the whole range, so a fit's weighted sum of
    squares is the midpoint rule for the same integral on any grid (the grid
    step no longer decides how much of the curve's start, where the yield
    knee pins A and n, enters the fit).

    Each node's value is the intercept of a least-squares quadratic through
    the samples within half a window of it (|ε_p − node| ≤ w/2, w the larger
    of ``window`` and ``step``): it averages noise like a bin mean but, unlike
    a mean, has no bias from the curve's curvature (a mean is off by
    σ''·w²/24, which pulls a fitted yield stress). With the window fixed and
    the step made finer, every node still averages the same stretch of
    samples: a finer grid samples the curve more densely without making its
    nodes noisier.

    Returns
    -------
    nodes, values, weights : numpy.ndarray
        Plastic strain [1], stress [Pa] and quadrature weight [steps] of each
        node, in order of strain.
    grid_nodes : int
        How many of them are grid nodes k·step (the end pieces' nodes are not).
    """
    order = np.argsort(eps, kind="stable")
    eps, sig = eps[order], sig[order]
    window = window or step
    width = max(step, window)
    first, last = max(float(eps[0]), window / 2.0), float(eps[-1])  # (below: the yield transition)
    lo, hi = math.ceil(first / step - 1e-9), math.floor(last / step + 1e-9)
    grid = np.arange(max(lo, 1), hi + 1) * step
    if grid.size == 0 or last <= first:
        return grid, grid.copy(), grid.copy(), 0
    cell_lo = np.maximum(grid - step / 2.0, first)
    cell_hi = np.minimum(grid + step / 2.0, last)
    weights = (cell_hi - cell_lo) / step
    head, tail = cell_lo[0] - first, last - cell_hi[-1]
    tol = 1e-9 * step
    nodes = np.concatenate(([first + head / 2.0] if head > tol else [], grid,
                            [last - tail / 2.0] if tail > tol else []))
    weights = np.concatenate(([head / step] if head > tol else [], weights, [tail / step] if tail > tol else []))
    inside = eps >= first - tol  # (the nodes at the start see none of the transition's samples)
    return nodes, _node_values(eps[inside], sig[inside], nodes, step, width), weights, int(grid.size)


def resample_curves(curves, step=GRID_STEP, window=GRID_STEP):
    """Put every curve on the common plastic-strain grid k·step, k = 1, 2, …, plus a node for each end piece.

    Parameters
    ----------
    curves : sequence of Curve
        Curves with raw (sample-wise) plastic strain [1] and stress [Pa].
    step : float
        Grid step [1].
    window : float, optional
        Plastic-strain width [1] of the samples averaged into each node, at
        least ``step`` (default the default step, 0.005): a grid finer than
        the window samples the curve more densely without making its nodes
        noisier, so the fit and its bootstrap intervals do not depend on the
        step. None: the step.

    Returns
    -------
    CurveList
        Curves sampled at the grid nodes each one covers and at the middle of
        its end pieces, each node with its quadrature weight
        (:attr:`Curve.node_weight`, see :func:`_resample_one`), so every
        curve weighs by the plastic-strain range it spans, not by its sample
        count, on any grid. Each node takes a local quadratic fit to the
        samples within half a window (noise down, no curvature bias, no
        extrapolation). Curves with
        fewer than 3 nodes are dropped with a note.
    """
    if not step > 0:
        raise InputError(f"grid step must be > 0, got {step!r}", "grid_step")
    out = CurveList(notes=getattr(curves, "notes", []))
    for c in curves:
        nodes, sig, weight, on_grid = _resample_one(np.asarray(c.plastic_strain, float), np.asarray(c.stress, float),
                                                    step, window)
        if on_grid < 3:
            out.notes.append(
                f"{c.name}: plastic-strain range too short for the grid (step {step:g}); curve skipped"
            )
            continue
        u = None
        if c.stress_u is not None:
            # the nodes' u: the rows' u interpolated, not divided by the rows per node (a stress uncertainty from
            # calibration and wave speed is the same error on neighbouring rows, not independent noise)
            order = np.argsort(c.plastic_strain, kind="stable")
            u = np.interp(nodes, np.asarray(c.plastic_strain, float)[order], np.asarray(c.stress_u, float)[order])
        out.append(replace(c, plastic_strain=nodes, stress=sig, temperature_rise=None, stress_u=u,
                           node_weight=weight))
    return out


def with_adiabatic_heating(curves, specific_heat, density=None, beta=0.9):
    """Add the adiabatic temperature rise along each shot curve.

    Parameters
    ----------
    curves : sequence of Curve
        Curves on their plastic-strain grid.
    specific_heat : float or str
        Specific heat capacity [J/(kg·K)] (or ``"385 J/(kg*K)"``).
    density : float or str, optional
        Specimen density [kg/m³] (or ``"8960 kg/m^3"``); default each
        curve's density from its summary (``inputs.specimen.density_kg_per_m3``).
    beta : float
        Taylor–Quinney coefficient [1] (Taylor & Quinney 1934).

    Returns
    -------
    CurveList
        The same curves, shot curves with ``temperature_rise`` set from
        :func:`shpb.models.adiabatic_temperature_rise`. Quasi-static reference
        curves are left isothermal (slow tests lose their heat).
    """
    rho_all = None if density is None else to_si(density, "density", "density")
    cp = to_si(specific_heat, "specific_heat", "specific_heat")
    if not (cp > 0 and 0 <= beta <= 1):
        raise InputError(f"need specific heat > 0 and 0 <= beta <= 1, got {cp}, {beta}", "adiabatic heating")
    out = CurveList(notes=getattr(curves, "notes", []))
    used = set()
    for c in curves:
        if c.kind == "shot":
            rho = rho_all if rho_all is not None else c.density
            if rho is None or not rho > 0:
                raise InputError("no specimen density for adiabatic heating; give --density", c.source)
            used.add(rho)
            c = replace(c, temperature_rise=adiabatic_temperature_rise(c.plastic_strain, c.stress, rho, cp, beta))
        out.append(c)
    rhos = ", ".join(f"{r:g}" for r in sorted(used)) or "n/a"
    out.notes.append(
        f"adiabatic heating on shot curves: beta = {beta:g}, density = {rhos} kg/m^3, "
        f"specific heat = {cp:g} J/(kg K) (Taylor & Quinney 1934); quasi-static curves isothermal"
    )
    return out


# --------------------------------------------------------------------------
# Reading
# --------------------------------------------------------------------------

_STRESS_SCALES = {"Pa": 1.0, "kPa": 1e3, "MPa": 1e6, "GPa": 1e9}


def _stress_uncertainty(df, column, scale):
    """The standard uncertainty column ``u_<column>`` [Pa] (same unit as the stress column), or None."""
    from .uncertainty import standard_name

    name = standard_name(column)
    if name not in df.columns:
        return None
    return pd.to_numeric(df[name], errors="coerce").to_numpy(float) * scale


def _stress_column(df, source, prefer=("true_stress", "stress")):
    """Find a stress column with a unit suffix; return (values [Pa], column, is_true)."""
    for base in prefer:
        found = [(f"{base}_{u}", s) for u, s in _STRESS_SCALES.items() if f"{base}_{u}" in df.columns]
        if len(found) > 1:
            raise InputError(
                f"columns {', '.join(c for c, _ in found)} give the same stress in different units; keep one",
                source,
            )
        if found:
            col, scale = found[0]
            return pd.to_numeric(df[col], errors="coerce").to_numpy(float) * scale, col, base == "true_stress"
        if base in df.columns:
            raise InputError(
                f"column {base!r} has no unit in its name; expected e.g. '{base}_MPa'", source
            )
    raise InputError(
        "no stress column; expected 'true_stress_MPa' (or 'stress_MPa', or the same with _Pa/_GPa)", source
    )


def _scale_of(column):
    """SI value per unit of a stress column (``true_stress_MPa`` -> 1e6)."""
    return _STRESS_SCALES[column.rsplit("_", 1)[1]]


def _dig(mapping, *keys):
    for k in keys:
        if not isinstance(mapping, dict) or k not in mapping:
            return None
        mapping = mapping[k]
    return mapping


def _number(value, where):
    if value is None:
        return None
    try:
        out = float(value)
    except (TypeError, ValueError):
        raise InputError(f"expected a number, got {value!r}", where) from None
    if not math.isfinite(out):
        raise InputError(f"expected a finite number, got {value!r}", where)
    return out


def _finish_curve(name, source, kind, strain, sig, valid, rate, temperature, material, modulus, modulus_source,
                  notes, elastic=None, density=None, u=None, column=""):
    """Common part of shot and quasi-static reading: checks, modulus, plastic strain."""
    if strain.size == 0 or not np.any(valid):
        return None, f"{name}: no rows with valid == 1 in {source}; curve skipped", None
    if np.nanmedian(sig[valid]) < 0:  # tension-negative file: work with magnitudes
        strain, sig = -strain, -sig
        elastic = None if elastic is None else (-elastic[0], -elastic[1])
        notes.append("stress was negative (tension); magnitudes used")
    level = (name, str(source), float(np.median(sig[valid])))
    if np.nanmax(np.abs(strain[valid])) > 2.0:
        raise InputError(
            f"strain reaches {np.nanmax(np.abs(strain[valid])):.3g}; expected a fraction (is it in percent?)", source
        )
    if not (rate > 0):
        raise InputError(f"strain rate must be > 0 1/s, got {rate!r}", source)
    if modulus is None:
        es, ss = elastic if elastic is not None else (strain, sig)
        modulus = apparent_modulus(es, ss)
        if not (modulus > 0):
            raise InputError(
                "cannot fit a modulus from the elastic part; give the specimen modulus (--modulus)", source
            )
        modulus_source = "fitted from elastic part"
        notes.append(f"modulus {modulus / 1e9:.4g} GPa fitted from the elastic part (apparent)")
    eps_p = plastic_strain_from_total(strain[valid], sig[valid], modulus)
    keep = np.isfinite(eps_p) & np.isfinite(sig[valid]) & (eps_p > 0)
    if np.count_nonzero(keep) < 3:
        return None, (f"{name}: fewer than 3 valid rows with plastic strain > 0 in {source} (stress/modulus "
                      f"exceeds the strain: check the modulus {modulus / 1e9:.4g} GPa and the stress units); "
                      "curve skipped"), level
    curve = Curve(
        name=name,
        plastic_strain=eps_p[keep],
        stress=sig[valid][keep],
        strain_rate=float(rate),
        temperature=float(temperature),
        material=material,
        source=str(source),
        modulus=float(modulus),
        modulus_source=modulus_source,
        kind=kind,
        density=density,
        notes=tuple(notes),
        stress_u=None if u is None else u[valid][keep],
        stress_column=column,
    )
    return curve, None, level


def _read_csv(path, **kw):
    try:
        return pd.read_csv(path, **kw)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read as CSV ({str(exc).splitlines()[0]})", str(path)) from None


def _read_shot(folder: Path, modulus, room_temperature):
    """One shot folder -> (Curve or None, note or None, stress level or None)."""
    csv_path, js_path = folder / ShotResult.CURVES_FILE, folder / ShotResult.SUMMARY_FILE
    if not js_path.is_file():
        raise InputError(f"{ShotResult.SUMMARY_FILE} not found next to {ShotResult.CURVES_FILE}", str(folder))
    summary = ShotResult.read_summary(folder)
    df = _read_csv(csv_path)
    src = str(csv_path)
    for col in ("true_strain", "valid"):
        if col not in df.columns:
            raise InputError(f"missing column {col!r}", src)
    name = str(summary.get("shot") or folder.name)
    if isinstance(summary.get("shot"), dict):  # tolerate {"name": ...}
        name = str(summary["shot"].get("name") or folder.name)
    sig, col, is_true = _stress_column(df, src)
    notes = [] if is_true else [f"no true stress column; {col} used"]
    strain = pd.to_numeric(df["true_strain"], errors="coerce").to_numpy(float)
    valid = pd.to_numeric(df["valid"], errors="coerce").fillna(0).to_numpy() == 1
    rate = _dig(summary, "results", "mean_strain_rate_per_s")
    rate = float(rate) if isinstance(rate, (int, float)) and not isinstance(rate, bool) else None
    if rate is None or not math.isfinite(rate):
        if "strain_rate_per_s" not in df.columns or not np.any(valid):
            raise InputError("no results.mean_strain_rate_per_s and no strain_rate_per_s column", str(js_path))
        rate = float(np.nanmean(pd.to_numeric(df["strain_rate_per_s"], errors="coerce").to_numpy(float)[valid]))
        notes.append("strain rate = mean of strain_rate_per_s over valid rows (not in summary)")
    spec = _dig(summary, "inputs", "specimen") or {}
    where = f"{js_path}: inputs.specimen"
    temperature = _number(spec.get("temperature_K", spec.get("temperature")), f"{where}.temperature_K")
    if temperature is None:
        temperature = room_temperature
        notes.append(f"no specimen temperature; room temperature {room_temperature:g} K assumed")
    if temperature <= 0:
        raise InputError(f"temperature must be > 0 K, got {temperature}", f"{where}.temperature_K")
    mod = _number(spec.get("modulus_Pa", spec.get("modulus")), f"{where}.modulus_Pa")
    mod_src = "summary"
    if mod is None and modulus is not None:
        mod, mod_src = modulus, "option"
    if mod is not None and not mod > 0:
        raise InputError(f"modulus must be > 0 Pa, got {mod}", f"{where}.modulus_Pa")
    material = str(spec.get("material") or "")
    density = _number(spec.get("density_kg_per_m3"), f"{where}.density_kg_per_m3")
    ok = np.isfinite(strain) & np.isfinite(sig)
    curve, note, level = _finish_curve(
        name, src, "shot", strain, sig, valid & ok, rate, temperature, material, mod, mod_src, notes,
        elastic=(strain[ok], sig[ok]), density=density, u=_stress_uncertainty(df, col, _scale_of(col)), column=col,
    )
    if curve is not None:
        curve = replace(curve, **_shared_budget(summary))
    return curve, note, level


def _shared_budget(summary):
    """The bar set's share of a shot's relative stress and strain uncertainty, and the bar set's identity."""
    bars = _dig(summary, "inputs", "barset") or {}
    group = f"{bars.get('source') or ''} | {bars.get('name') or ''}" if isinstance(bars, dict) else ""
    out = {"shared_group": group.strip(" |")}
    for key, what in (("shared_stress_u", "stress"), ("shared_strain_u", "strain")):
        v = _dig(summary, "uncertainty", "relative_by_group", what, "bar set")
        out[key] = float(v) if isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) \
            and v >= 0 else None
    return out


def _header(path: Path):
    """``# key = value`` lines at the top of a CSV -> dict (keys lower-case)."""
    meta = {}
    try:
        with open(path, encoding="utf-8") as fh:
            for line in fh:
                s = line.strip()
                if not s:
                    continue
                if not s.startswith("#"):
                    break
                body = s.lstrip("#").strip()
                if "=" in body:
                    k, v = body.split("=", 1)
                    meta[k.strip().lower().replace(" ", "_")] = v.strip().strip('"')
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc.reason} at byte {exc.start})", str(path)) from None
    return meta


def read_quasi_static(path, *, strain_rate=None, temperature=None, modulus=None, room_temperature=ROOM_TEMPERATURE):
    """Read a quasi-static (or any reference) flow curve from CSV.

    Format: comment lines ``# key = value`` at the top, then a header row.
    Header keys: ``strain_rate`` (required here or as argument, e.g.
    ``# strain_rate = 1e-3 1/s``), ``temperature`` (``# temperature = 293 K``;
    default room temperature, with a note), ``material``, ``name``,
    ``modulus``. Columns: ``plastic_strain`` or ``true_strain`` or ``strain``
    (engineering, compression; converted to true), and ``true_stress_MPa`` or
    ``stress_MPa`` (engineering, converted), or the same with _Pa/_GPa;
    optional ``valid`` (1/0). Header values win over arguments, which are
    only defaults.

    Parameters
    ----------
    path : str or Path
        The CSV file.
    strain_rate : float or str, optional
        Strain rate [1/s] if the header gives none.
    temperature : float or str, optional
        Temperature [K] if the header gives none.
    modulus : float or str, optional
        Modulus [Pa] for ε_p = ε − σ/E if the header gives none.
    room_temperature : float
        Temperature assumed when none is given [K].

    Returns
    -------
    Curve
        With ``kind="quasi-static"`` (raw samples, not yet on the grid).
    """
    path = Path(path)
    if not path.is_file():
        raise InputError("quasi-static file not found", str(path))
    meta = _header(path)
    src = str(path)
    df = _read_csv(path, comment="#")
    notes = []
    rate_v = meta.get("strain_rate", meta.get("strain_rate_per_s", strain_rate))
    if rate_v is None:
        raise InputError("no strain rate; add a header line '# strain_rate = 0.001 1/s'", src)
    rate = to_si(rate_v, "strain_rate", f"{src}: strain_rate")
    temp_v = meta.get("temperature", meta.get("temperature_k", temperature))
    if temp_v is None:
        temp = room_temperature
        notes.append(f"no temperature; room temperature {room_temperature:g} K assumed")
    else:
        temp = to_si(temp_v, "temperature", f"{src}: temperature")
    mod_v = meta.get("modulus", modulus)
    mod = None if mod_v is None else to_si(mod_v, "pressure", f"{src}: modulus")
    mod_src = "file header" if "modulus" in meta else "option"
    sig, col, is_true = _stress_column(df, src)
    u = _stress_uncertainty(df, col, _scale_of(col))
    valid = np.ones(len(df), bool)
    if "valid" in df.columns:
        valid = pd.to_numeric(df["valid"], errors="coerce").fillna(0).to_numpy() == 1
    name = meta.get("name", path.stem)
    if "plastic_strain" in df.columns:
        eps = pd.to_numeric(df["plastic_strain"], errors="coerce").to_numpy(float)
        strain_kind = "plastic"
    elif "true_strain" in df.columns:
        eps = pd.to_numeric(df["true_strain"], errors="coerce").to_numpy(float)
        strain_kind = "true"
    elif "strain" in df.columns:
        e = pd.to_numeric(df["strain"], errors="coerce").to_numpy(float)
        eps = -np.log1p(-e)  # compression, constant volume (Gray 2000, ASM Handbook vol. 8)
        strain_kind = "engineering"
        notes.append("engineering strain converted to true strain, -ln(1 - e) (compression)")
    else:
        raise InputError("no strain column; expected 'plastic_strain', 'true_strain' or 'strain'", src)
    if not is_true:
        if strain_kind == "plastic":
            raise InputError("a plastic_strain column needs a true stress column ('true_stress_MPa')", src)
        e = -np.expm1(-eps)  # engineering strain back from true strain (compression)
        sig = sig * (1.0 - e)
        u = None if u is None else u * (1.0 - e)
        notes.append(f"engineering stress ({col}) converted to true stress, sigma (1 - e) (compression)")
    ok = np.isfinite(eps) & np.isfinite(sig)
    if strain_kind == "plastic":
        if np.any(valid & ok) and np.median(sig[valid & ok]) < 0:  # tension-negative file
            eps, sig = -eps, -sig
        keep = valid & ok & (eps > 0)
        if np.count_nonzero(keep) < 3:
            raise InputError("fewer than 3 valid rows with plastic strain > 0", src)
        return Curve(name, eps[keep], sig[keep], rate, temp, material=meta.get("material", ""), source=src,
                     modulus=None, modulus_source="plastic strain given", kind="quasi-static", notes=tuple(notes),
                     stress_u=None if u is None else np.abs(u[keep]), stress_column=col)
    curve, note, _ = _finish_curve(
        name, src, "quasi-static", eps, sig, valid & ok, rate, temp, meta.get("material", ""), mod, mod_src, notes,
        elastic=(eps[ok], sig[ok]), u=u, column=col,
    )
    if curve is None:
        raise InputError(note, src)
    return curve


def _shot_folders(path: Path):
    """Expand one input path into shot folders."""
    from .campaign import SHOTS_DIR, shot_folders

    if path.is_file() and path.name == ShotResult.CURVES_FILE:
        return [path.parent]
    if not path.exists():
        raise InputError("not found", str(path))
    if (path / ShotResult.CURVES_FILE).is_file():
        return [path]
    if (path / SHOTS_DIR).is_dir():
        return shot_folders(path)
    raise InputError(
        f"expected a shot result folder ({ShotResult.CURVES_FILE} + {ShotResult.SUMMARY_FILE}) or a campaign output "
        f"folder ({SHOTS_DIR}/<id>/)",
        str(path),
    )


def incomplete_reason(folder: Path):
    """Why a shot result folder is not a complete result, or None when it is.

    A folder of a campaign output (``OUT/shots/<id>/`` beside the campaign
    marker file) is complete when its key file ``inputs.sha256`` is there
    (written last) and, when the campaign summary is present, that summary
    lists it as reduced. A folder of ``shpb reduce`` is complete when its
    ``summary.json`` is there (written last).
    """
    from .campaign import FAILED, KEY_FILE, SHOTS_DIR, SUMMARY_TABLE
    from .runstate import MARKER_FILE

    folder = Path(folder)
    if not (folder / ShotResult.SUMMARY_FILE).is_file():
        return f"no {ShotResult.SUMMARY_FILE} (written last): the result is incomplete"
    out = folder.parent.parent
    if folder.parent.name != SHOTS_DIR or not (out / MARKER_FILE).is_file():
        return None
    if not (folder / KEY_FILE).is_file():
        return f"no {KEY_FILE} (a campaign shot folder's completion key, written last): the result is incomplete"
    table = out / SUMMARY_TABLE
    if table.is_file():
        status = _campaign_status(table).get(folder.name)
        if status is None:
            return f"not in {table} (the campaign's table does not list this shot)"
        if status == FAILED:
            return f"{table} says this shot failed"
    return None


def _campaign_status(table: Path) -> dict:
    import csv

    with open(table, newline="", encoding="utf-8") as fh:
        return {row.get("id"): row.get("status") for row in csv.DictReader(fh)}


def _check_consistency(curves, levels, allow_mixed_materials):
    """Mixed units and mixed materials across curves -> InputError.

    ``levels``: (name, source, median valid stress [Pa]) of every file with
    valid rows, including those later skipped (a file in the wrong unit is
    often skipped for having no positive plastic strain).
    """
    if len(levels) >= 2:
        vals = np.array([lv[2] for lv in levels])
        i, j = int(np.argmax(vals)), int(np.argmin(vals))
        if vals[j] <= 0 or vals[i] / vals[j] > _MIXED_UNIT_RATIO:
            raise InputError(
                f"flow stresses differ by a factor {vals[i] / max(vals[j], 1e-300):.3g}: {levels[i][0]} "
                f"{vals[i] / 1e6:.4g} MPa vs {levels[j][0]} {vals[j] / 1e6:.4g} MPa; mixed units "
                "(Pa/MPa/GPa) in the stress columns?",
                levels[i][1],
            )
    mats = sorted({c.material.strip() for c in curves if c.material.strip()})
    if len(mats) > 1 and not allow_mixed_materials:
        raise InputError(
            f"curves of different materials: {', '.join(mats)}; fit one material at a time "
            "(or allow mixed materials)",
            "material",
        )


def load_curves(
    paths,
    *,
    quasi_static=(),
    modulus=None,
    room_temperature=ROOM_TEMPERATURE,
    quasi_static_rate=None,
    quasi_static_temperature=None,
    grid_step=GRID_STEP,
    include_invalid_shots=False,
    allow_mixed_materials=False,
    include_incomplete=False,
):
    """Load reduced shots (and reference curves) as plastic-strain flow curves.

    Parameters
    ----------
    paths : str, Path or sequence of them
        Shot result folders (``curves.csv`` + ``summary.json``), campaign
        output folders (``shots/<id>/``), or ``curves.csv`` files.
    quasi_static : sequence of str or Path
        Reference CSV files, see :func:`read_quasi_static`.
    modulus : float or str, optional
        Specimen modulus [Pa] (or ``"70 GPa"``) for shots whose summary has
        none (``inputs.specimen.modulus_Pa``) and reference files whose header
        has none; with neither, the modulus is fitted from each curve's
        elastic part (:func:`apparent_modulus`). Each curve records which.
    room_temperature : float or str
        Temperature for shots without one [K].
    quasi_static_rate, quasi_static_temperature : float or str, optional
        Defaults for reference files whose header lacks them [1/s], [K].
    grid_step : float or None
        Common plastic-strain grid step [1]; None keeps raw samples.
    include_invalid_shots : bool
        Also use shots whose summary says ``"valid": false`` (their valid
        rows only).
    allow_mixed_materials : bool
        Do not refuse curves of different materials.
    include_incomplete : bool
        Also use shot folders that are not complete results
        (:func:`incomplete_reason`); each is named in ``.notes``.

    Returns
    -------
    CurveList
        Curves with true plastic strain [1] and true stress [Pa] of the rows
        with ``valid == 1``; ``.notes`` lists skipped shots and assumptions.

    Raises
    ------
    InputError
        Missing files or columns, mixed units, mixed materials.
    AnalysisError
        No curve has a usable valid region.
    """
    if isinstance(paths, (str, os.PathLike)):
        paths = [paths]
    if isinstance(quasi_static, (str, os.PathLike)):
        quasi_static = [quasi_static]
    mod = None if modulus is None else to_si(modulus, "pressure", "modulus")
    room = to_si(room_temperature, "temperature", "room_temperature")
    curves, notes, seen, levels = [], [], {}, []
    for p in paths:
        for folder in _shot_folders(Path(p)):
            if not (folder / ShotResult.CURVES_FILE).is_file():
                notes.append(f"{folder.name}: no {ShotResult.CURVES_FILE} in {folder}; skipped")
                continue
            why = incomplete_reason(folder)
            if why is not None:
                if not include_incomplete:
                    raise InputError(f"not a complete result: {why} (--include-incomplete uses it anyway)",
                                     str(folder))
                notes.append(f"{folder.name}: used although {why}")
            js = folder / ShotResult.SUMMARY_FILE
            if js.is_file() and not include_invalid_shots:
                if ShotResult.read_summary(folder).get("valid", True) is False:
                    notes.append(f"{folder.name}: summary says the shot is not valid; skipped")
                    continue
            curve, note, level = _read_shot(folder, mod, room)
            if level is not None:
                levels.append(level)
            if curve is None:
                notes.append(note)
                continue
            if curve.name in seen:
                raise InputError(f"shot {curve.name!r} given twice (also in {seen[curve.name]})", str(folder))
            seen[curve.name] = str(folder)
            curves.append(curve)
    for q in quasi_static:
        c = read_quasi_static(q, strain_rate=quasi_static_rate, temperature=quasi_static_temperature,
                              modulus=modulus, room_temperature=room)
        if c.name in seen:
            raise InputError(f"curve name {c.name!r} used twice (also {seen[c.name]}); set '# name = ...'", c.source)
        seen[c.name] = c.source
        curves.append(c)
        levels.append((c.name, c.source, float(np.median(c.stress))))
    _check_consistency(curves, levels, allow_mixed_materials)
    if not curves:
        why = "; ".join(notes) if notes else "no shot folders found"
        raise AnalysisError(f"no curve with a usable valid region ({why})")
    out = CurveList(curves, notes)
    if grid_step is not None:
        out = resample_curves(out, grid_step)
        if not out:
            raise AnalysisError("no curve spans at least 3 points of the plastic-strain grid: " + "; ".join(out.notes))
    return out


# --------------------------------------------------------------------------
# Fitting
# --------------------------------------------------------------------------


@dataclass
class ParameterResult:
    """One fitted (or fixed) parameter, SI.

    Attributes
    ----------
    name : str
        Parameter name in the model function.
    value : float
        Value [SI unit of ``unit``].
    stderr : float or None
        Least-squares standard error from the fit covariance [same unit],
        which assumes independent residuals and shrinks with the grid step:
        kept for comparison, **not** the reported uncertainty; None if fixed
        or not estimable.
    unit : str
        SI unit.
    varied : bool
        Fitted (True) or fixed (False).
    note : str
        Why it is fixed, if it is.
    report_key, report_scale : str, float
        Output key with unit, and SI value per reported unit.
    u : float or None
        Standard uncertainty from the bootstrap over whole curves
        (:mod:`shpb.fit_uncertainty`) [same unit]; None without one.
    low, high : float or None
        95 % bootstrap (percentile) interval [same unit].
    """

    name: str
    value: float
    stderr: float | None
    unit: str
    varied: bool
    note: str = ""
    report_key: str = ""
    report_scale: float = 1.0
    u: float | None = None
    low: float | None = None
    high: float | None = None

    @property
    def report_value(self) -> float:
        return self.value / self.report_scale

    @property
    def report_stderr(self):
        return None if self.stderr is None else self.stderr / self.report_scale

    @property
    def report_u(self):
        return None if self.u is None else self.u / self.report_scale

    @property
    def report_interval(self):
        if self.low is None or self.high is None:
            return None
        return (self.low / self.report_scale, self.high / self.report_scale)


@dataclass
class CurveStats:
    """Fit quality on one curve: RMS residual [Pa] and R² [1] over its points."""

    name: str
    strain_rate: float
    temperature: float
    n_points: int
    rms: float
    r_squared: float


@dataclass
class FitResult:
    """A fitted model with its data, statistics and notes (SI inside).

    Attributes
    ----------
    model : str
        Registry name.
    method : str
        ``"global"`` or ``"staged"``.
    parameters : dict of ParameterResult
        By parameter name.
    correlations : dict
        ``{(name_a, name_b): r}``, correlation coefficients of the varied
        parameters: from the bootstrap draws when there is a bootstrap,
        else from the least-squares covariance (lmfit; ``log10_D`` for
        parameters fitted on a log scale).
    settings : dict
        Model settings used (``reference_rate`` [1/s], temperatures [K]).
    curves : list of Curve
        The data fitted.
    curve_stats : list of CurveStats
        Per-curve RMS residual and R².
    rms : float
        Overall RMS residual [Pa].
    r_squared : float
        Overall R² [1].
    n_points : int
        Number of data points fitted.
    notes : list of str
        Assumptions, fixed parameters, warnings.
    success : bool
        Optimiser convergence.
    message : str
        The optimiser's message.
    staged : FitResult or None
        The staged Johnson–Cook route, when asked for.
    model_spec : ModelSpec or None
        The model's spec (for models not in the registry).
    bootstrap : BootstrapResult or None
        The bootstrap over whole curves that gives each parameter's ``u``
        and interval (:mod:`shpb.fit_uncertainty`).
    """

    model: str
    method: str
    parameters: dict
    correlations: dict
    settings: dict
    curves: list
    curve_stats: list
    rms: float
    r_squared: float
    n_points: int
    notes: list = field(default_factory=list)
    success: bool = True
    message: str = ""
    staged: "FitResult | None" = None
    model_spec: "ModelSpec | None" = None
    bootstrap: "BootstrapResult | None" = None

    @property
    def values(self) -> dict:
        """Parameter values by name [SI]."""
        return {k: p.value for k, p in self.parameters.items()}

    @property
    def spec(self) -> ModelSpec:
        """The model's :class:`~shpb.models.ModelSpec`."""
        return self.model_spec if self.model_spec is not None else get_model(self.model)

    def predict(self, plastic_strain, strain_rate, temperature=ROOM_TEMPERATURE):
        """Model flow stress [Pa] at plastic strain [1], strain rate [1/s], temperature [K]."""
        return evaluate(self.spec, self.values, plastic_strain, strain_rate, temperature, **self.settings)


def parse_fixed(model, items):
    """Parse ``["C=0.014", "A=90 MPa"]`` into ``{"C": 0.014, "A": 9e7}`` (SI).

    Parameters
    ----------
    model : str or ModelSpec
        The model whose parameters are named.
    items : sequence of str
        ``name=value`` with an optional unit (Pa-type parameters accept
        ``"90 MPa"``; a bare number is SI).

    Returns
    -------
    dict
        Parameter values [SI].
    """
    spec = get_model(model)
    dims = {"Pa": "pressure", "1": "dimensionless", "1/s": "strain_rate"}
    out = {}
    for item in items or ():
        if "=" not in item:
            raise InputError(f"expected NAME=VALUE, got {item!r}", "--fix")
        name, value = (s.strip() for s in item.split("=", 1))
        p = spec.parameter(name)
        if p.unit in dims:
            out[name] = to_si(value, dims[p.unit], f"--fix {name}")
        else:
            out[name] = _number(value, f"--fix {name} (a bare number in {p.unit})")
    return out


def _levels(values, close):
    """Group sorted values into levels; ``close(a, b)`` says two belong together."""
    v = np.sort(np.asarray(values, float))
    levels = [[v[0]]] if v.size else []
    for x in v[1:]:
        if close(levels[-1][0], x):
            levels[-1].append(x)
        else:
            levels.append([x])
    return [float(np.exp(np.mean(np.log(lv)))) for lv in levels]


def _level_index(value, levels, close):
    for i, lv in enumerate(levels):
        if close(lv, value):
            return i
    return int(np.argmin([abs(lv - value) for lv in levels]))


def _data_levels(curves, rate_tolerance, temperature_tolerance):
    rate_close = lambda a, b: abs(math.log(b / a)) <= math.log(rate_tolerance)  # noqa: E731
    temp_close = lambda a, b: abs(b - a) <= temperature_tolerance  # noqa: E731
    rates = _levels([c.strain_rate for c in curves], rate_close)
    temps = _levels([c.temperature for c in curves], temp_close)
    cond = {(_level_index(c.strain_rate, rates, rate_close), _level_index(c.temperature, temps, temp_close))
            for c in curves}
    return rates, temps, len(cond)


def _fmt_levels(levels, unit):
    return ", ".join(f"{v:.3g}" for v in levels) + f" {unit}"


def _identify(spec, curves, settings, fixed, vary, rate_tol, temp_tol):
    """Decide which parameters to fix because the data cannot identify them.

    k free parameters identified by rates need k + 1 rate levels (one level
    only sets the scale); likewise temperatures and rate–temperature
    conditions. Returns (fixed dict, notes); raises AnalysisError when a
    parameter the user asked to vary, or one without a default, cannot be
    identified.
    """
    rates, temps, n_cond = _data_levels(curves, rate_tol, temp_tol)
    available = {"rates": len(rates), "temperatures": len(temps), "conditions": n_cond}
    fixed = dict(fixed)
    unit = {p.name: ("" if p.unit == "1" else f" {p.unit}") for p in spec.parameters}
    notes = [f"{k} fixed by the user at {v:g}{unit[k]}" for k, v in fixed.items()]
    describe = {
        "rates": f"strain-rate levels ({_fmt_levels(rates, '1/s')})",
        "temperatures": f"temperature levels ({_fmt_levels(temps, 'K')})",
        "conditions": "distinct rate-temperature conditions",
    }
    for kind, have in available.items():
        free = [p for p in spec.parameters if p.identified_by == kind and p.name not in fixed]
        excess = len(free) - (have - 1)
        if excess <= 0:
            continue
        what = describe[kind]
        if have == 1:
            what = what.replace("levels", "level", 1).replace("conditions", "condition", 1)
        names = ", ".join(p.name for p in free)
        one = len(free) == 1
        head = (f"{names} {'is' if one else 'are'} not identifiable: the data have {have} {what}; "
                f"fitting {'it' if one else 'all of them'} needs at least {len(free) + 1}")
        # Fix parameters with a neutral default first, the last-listed first;
        # never one the user asked to vary.
        can_fix = sorted((p for p in free if p.default is not None and p.name not in vary),
                         key=lambda p: -spec.parameters.index(p))
        if len(can_fix) < excess:
            asked = [p.name for p in free if p.name in vary]
            hint = f"asked to fit {', '.join(asked)}; " if asked else ""
            tail = f"{hint}{'fix it' if one else 'fix some'} (--fix NAME=VALUE) or add curves"
            raise AnalysisError(f"{head}. {tail[0].upper()}{tail[1:]}")
        for p in can_fix[:excess]:
            fixed[p.name] = p.default
            notes.append(f"{head}; {p.name} fixed at {p.default:g}"
                         + _fixed_consequence(spec, p.name, rates, temps, settings, _max_rise(curves)))
    return fixed, notes


def _max_rise(curves):
    """Largest adiabatic temperature rise along any curve [K] (0 without heating)."""
    return max((float(np.max(c.temperature_rise)) for c in curves if c.temperature_rise is not None), default=0.0)


def _fixed_consequence(spec, name, rates, temps, settings, rise=0.0):
    """What a fixed default means for the other parameters (one sentence)."""
    if spec.name in ("johnson-cook", "power-law") and name == "C":
        ref = settings.get("reference_rate", 1.0)
        if abs(math.log(rates[0] / ref)) > math.log(1.5):
            return f" (the stress parameters then describe {rates[0]:.3g} 1/s, not the reference rate {ref:g} 1/s)"
        return " (the data are at the reference rate, where the rate term is 1)"
    if spec.name == "johnson-cook" and name == "m":
        if rise > 1.0:
            return (f" as an assumption: adiabatic heating raises the temperature by up to {rise:.3g} K along the "
                    "curves, so the thermal term is not 1 and the other parameters depend on m (see the note on m)")
        if abs(temps[0] - settings.get("room_temperature", ROOM_TEMPERATURE)) > 1.0:
            return f" (A and B assume this m to remove the thermal factor at {temps[0]:.4g} K)"
        return " (the data are at room temperature, where the thermal term is 1)"
    return ""


def _model_settings(spec, reference_rate, room_temperature, melt_temperature, curves, temp_tol):
    settings = {}
    if "reference_rate" in spec.settings:
        settings["reference_rate"] = to_si(reference_rate, "strain_rate", "reference_rate")
        if not settings["reference_rate"] > 0:
            raise InputError("must be > 0 1/s", "reference_rate")
    if "room_temperature" in spec.settings:
        room = to_si(room_temperature, "temperature", "room_temperature")
        settings["room_temperature"] = room
        cold = [c for c in curves if c.temperature < room - temp_tol]
        if cold:
            raise AnalysisError(
                f"{cold[0].name} at {cold[0].temperature:g} K is below the room (reference) temperature {room:g} K; "
                "the thermal term needs T >= Tr: set the room temperature to the lowest test temperature"
            )
    if "melt_temperature" in spec.settings:
        hot = [c for c in curves if c.temperature > settings["room_temperature"] + temp_tol
               or (c.temperature_rise is not None and np.any(c.temperature_rise > temp_tol))]
        if melt_temperature is None:
            if hot:
                raise InputError(
                    f"curves above room temperature ({hot[0].name}: {hot[0].temperature:g} K) need the melting "
                    "temperature (--melt-temperature, e.g. '1356 K')",
                    "melt_temperature",
                )
            settings["melt_temperature"] = math.inf
        else:
            tm = to_si(melt_temperature, "temperature", "melt_temperature")
            if not tm > settings["room_temperature"]:
                raise InputError(f"must be above the room temperature, got {tm:g} K", "melt_temperature")
            settings["melt_temperature"] = tm
    return settings


def _arrays(curves):
    eps = np.concatenate([c.plastic_strain for c in curves])
    rate = np.concatenate([np.full(c.plastic_strain.shape, c.strain_rate) for c in curves])
    temp = np.concatenate([c.temperatures for c in curves])
    sig = np.concatenate([c.stress for c in curves])
    return eps, rate, temp, sig


#: Residual weightings of a fit.
WEIGHTINGS = ("points", "curves", "uncertainty")


def _weights(curves, weighting):
    """Residual weights [1/Pa].

    ``"points"``: residuals in MPa; ``"curves"``: also each curve equal total
    weight; ``"uncertainty"``: residuals divided by the stress's standard
    uncertainty at each point (weights 1/u², in χ²), from the curves' ``u_``
    columns (:attr:`Curve.stress_u`). Each point's weight is also scaled by
    the square root of its quadrature weight (:attr:`Curve.node_weight`, the
    length of curve it stands for), so that the sum of squares is the same
    integral on any grid.
    """
    if weighting not in WEIGHTINGS:
        raise InputError(f"weighting must be one of {', '.join(WEIGHTINGS)}, got {weighting!r}", "weighting")
    from .uncertainty import standard_name

    quadrature = [np.ones(c.plastic_strain.size) if c.node_weight is None else np.asarray(c.node_weight, float)
                  for c in curves]
    w = []
    mean_q = np.mean([q.sum() for q in quadrature])
    for c, q_c in zip(curves, quadrature):
        q = np.sqrt(q_c)
        if weighting == "uncertainty":
            column = standard_name(c.stress_column or "true_stress_MPa")
            if c.stress_u is None:
                raise InputError(f"no column {column!r} (the stress's standard uncertainty) for weighting by "
                                 "uncertainty; reduce with the uncertainty on, or weight by points", c.source)
            u = np.asarray(c.stress_u, float)
            if not np.all(np.isfinite(u) & (u > 0)):
                raise InputError(f"column {column!r} must be > 0 on every valid row for weighting by "
                                 "uncertainty", c.source)
            w.append(q / u)
            continue
        f = math.sqrt(mean_q / q_c.sum()) if weighting == "curves" else 1.0
        w.append(q * (f / 1e6))
    return np.concatenate(w)


def _make_params(spec, start, fixed, stress_scale):
    import lmfit

    params = lmfit.Parameters()
    for p in spec.parameters:
        lo, hi = (p.min * stress_scale, p.max * stress_scale) if p.stress_scaled else (p.min, p.max)
        if p.name in fixed:
            params.add(p.name, value=float(fixed[p.name]), vary=False)
            continue
        v = float(start.get(p.name, p.hint * stress_scale if p.stress_scaled else p.hint))
        if not np.isfinite(v):
            v = p.hint * stress_scale if p.stress_scaled else p.hint
        if p.log_scale:
            llo, lhi = math.log10(lo), math.log10(hi)
            lv = float(np.clip(math.log10(max(v, lo)), llo + 1e-6 * (lhi - llo), lhi - 1e-6 * (lhi - llo)))
            params.add(f"log10_{p.name}", value=lv, min=llo, max=lhi)
            params.add(p.name, expr=f"10**log10_{p.name}")
        else:
            span = hi - lo
            params.add(p.name, value=float(np.clip(v, lo + 1e-6 * span, hi - 1e-6 * span)), min=lo, max=hi)
    return params


def _run_lmfit(spec, curves, settings, fixed, weighting, starts):
    """Least-squares fit from each start; keep the lowest chi-square."""
    import lmfit

    eps, rate, temp, sig = _arrays(curves)
    independent = {"plastic_strain": eps, "strain_rate": rate, "temperature": temp}
    kws = {v: independent[v] for v in spec.variables}
    kws.update(settings)
    model = lmfit.Model(spec.function, independent_vars=list(spec.variables) + list(spec.settings),
                        param_names=spec.parameter_names, nan_policy="raise")
    weights = _weights(curves, weighting)
    scale = float(np.max(np.abs(sig)))
    best = None
    for start in starts:
        params = _make_params(spec, start, fixed, scale)
        try:
            with np.errstate(all="ignore"):
                res = model.fit(sig, params, weights=weights, method="leastsq", fit_kws=_TOLERANCES, **kws)
        except ValueError:  # NaN from a start far off; try the next one
            continue
        if best is None or res.chisqr < best.chisqr:
            best = res
    if best is None:
        raise AnalysisError(f"the {spec.name} fit failed from every starting point (model gives NaN)")
    return best


def _stats(spec, curves, values, settings):
    per, res_all, sig_all = [], [], []
    for c in curves:
        pred = evaluate(spec, values, c.plastic_strain, c.strain_rate, c.temperatures, **settings)
        r = c.stress - pred
        ss_tot = float(np.sum((c.stress - c.stress.mean()) ** 2))
        r2 = 1.0 - float(np.sum(r**2)) / ss_tot if ss_tot > 0 else float("nan")
        per.append(CurveStats(c.name, c.strain_rate, c.temperature, int(r.size), float(np.sqrt(np.mean(r**2))), r2))
        res_all.append(r)
        sig_all.append(c.stress)
    r, s = np.concatenate(res_all), np.concatenate(sig_all)
    r2 = 1.0 - float(np.sum(r**2)) / float(np.sum((s - s.mean()) ** 2))
    return per, float(np.sqrt(np.mean(r**2))), r2


def _collect(spec, res, fixed_notes, only=None):
    """lmfit result -> ParameterResult dict (only the names in ``only`` if given) and correlations."""
    params, corr = {}, {}
    for p in spec.parameters:
        if only is not None and p.name not in only:
            continue
        lp = res.params[p.name]
        varied = lp.vary or bool(lp.expr)
        stderr = lp.stderr if varied and lp.stderr is not None and np.isfinite(lp.stderr) else None
        params[p.name] = ParameterResult(
            p.name, float(lp.value), None if stderr is None else float(stderr), p.unit, varied,
            fixed_notes.get(p.name, ""), p.report_key, p.report_scale,
        )
    names = [n for n, lp in res.params.items() if lp.vary]
    for a in names:
        for b, r in (res.params[a].correl or {}).items():
            if b in names and (b, a) not in corr:
                corr[(a, b)] = float(r)
    return params, corr


def _bound_notes(res):
    notes = []
    for name, lp in res.params.items():
        if lp.vary and np.isfinite(lp.min) and np.isfinite(lp.max):
            span = lp.max - lp.min
            if min(lp.value - lp.min, lp.max - lp.value) < 1e-4 * span:
                notes.append(f"{name} ended at its bound [{lp.min:g}, {lp.max:g}]; the data do not constrain it well")
    if not res.errorbars:
        notes.append("standard errors could not be estimated (singular covariance: parameters correlated or at bounds)")
    return notes


def _starts(spec, curves, settings):
    groups = [(c.plastic_strain, c.strain_rate, c.temperatures, c.stress) for c in curves]
    starts = []
    if spec.guess is not None:
        try:
            with np.errstate(all="ignore"):
                g = spec.guess(groups, **{k: settings[k] for k in spec.settings if k in settings})
            starts.append({k: v for k, v in g.items() if np.isfinite(v)})
        except (ValueError, ArithmeticError, IndexError, np.linalg.LinAlgError):
            pass  # a failed guess only costs the start; the registry hints remain
    starts.append({})  # registry hints
    return starts


def fit_curves(
    curves,
    model="johnson-cook",
    *,
    reference_rate=1.0,
    room_temperature=ROOM_TEMPERATURE,
    melt_temperature=None,
    fixed=None,
    vary=(),
    weighting="points",
    staged=False,
    rate_tolerance=1.5,
    temperature_tolerance=5.0,
    draws=DEFAULT_DRAWS,
    seed=DEFAULT_SEED,
    shared_errors=True,
):
    """Fit one constitutive model to all curves at once (global least squares).

    Parameters
    ----------
    curves : sequence of Curve
        From :func:`load_curves` (plastic strain [1], true stress [Pa]).
    model : str or ModelSpec
        Registry name: ``johnson-cook``, ``cowper-symonds``,
        ``zerilli-armstrong-fcc``, ``zerilli-armstrong-bcc``, ``power-law``.
    reference_rate : float or str
        Reference strain rate ε̇0 [1/s] (models with a log-rate term).
    room_temperature : float or str
        Room (reference) temperature T_r [K] (Johnson–Cook).
    melt_temperature : float or str, optional
        Melting temperature T_m [K]; needed when any curve is above T_r.
    fixed : dict, optional
        Parameters held at given values [SI].
    vary : sequence of str
        Parameters that must be fitted: if the data cannot identify one, fail
        instead of fixing it at its default.
    weighting : {"points", "curves", "uncertainty"}
        Equal weight per grid point, or per curve, or 1/u² from the curves'
        stress uncertainty columns (``u_true_stress_MPa``; an
        :class:`~shpb.errors.InputError` naming the file and column when a
        curve has none).
    staged : bool
        Johnson–Cook only: also run the classic staged route (A, B, n at the
        reference rate and room temperature; then C; then m) and attach it as
        ``result.staged``.
    rate_tolerance : float
        Rates within this factor count as one rate level [1].
    temperature_tolerance : float
        Temperatures within this many kelvin count as one level [K].
    draws : int
        Bootstrap draws for the parameters' uncertainties, intervals and
        correlations (:mod:`shpb.fit_uncertainty`); 0: none (then only the
        least-squares standard errors, which are not uncertainties).
    seed : int
        Random seed of the bootstrap.
    shared_errors : bool
        Draw each bar set's calibration errors, shared by all its shots, with
        every bootstrap draw (from the shots' uncertainty budgets; shots
        reduced without the uncertainty carry none). False: the scatter
        between and along the curves only, e.g. to compare the rate
        sensitivity of shots from one rig.

    Returns
    -------
    FitResult

    Raises
    ------
    InputError
        Bad settings (missing melting temperature, unknown model/parameter).
    AnalysisError
        No data, or a parameter that must be fitted cannot be identified.

    Notes
    -----
    Residuals are weighted to MPa (or by 1/u with ``weighting="uncertainty"``).
    The reported uncertainty of each parameter (``u``, ``low``, ``high``)
    and the correlations come from a bootstrap over whole curves (shot-level
    offsets resampled between curves, residuals within a curve by blocks
    longer than their correlation length; :mod:`shpb.fit_uncertainty`),
    which does not depend on the grid step. ``stderr`` is lmfit's
    least-squares standard error (covariance scaled by the reduced χ²): it
    assumes independent residuals, shrinks as 1/√(points) with the grid step
    and understates the real error several times on bar-test curves; it is
    kept only for comparison.
    """
    spec = get_model(model)
    load_notes = list(getattr(curves, "notes", []))
    curves = list(curves)
    if not curves:
        raise AnalysisError("no curves to fit")
    n_free = len(spec.parameters) - len(fixed or {})
    n_pts = sum(c.plastic_strain.size for c in curves)
    if n_pts <= n_free:
        raise AnalysisError(f"{n_pts} data points cannot fit {n_free} parameters")
    for name in list(fixed or {}) + list(vary):
        spec.parameter(name)  # unknown names -> InputError
    both = sorted(set(fixed or {}) & set(vary))
    if both:
        raise InputError(f"{', '.join(both)} both fixed and asked to vary", "fixed/vary")
    settings = _model_settings(spec, reference_rate, room_temperature, melt_temperature, curves, temperature_tolerance)
    fixed_all, id_notes = _identify(spec, curves, settings, fixed or {}, set(vary), rate_tolerance,
                                    temperature_tolerance)
    fixed_notes = {k: ("fixed by the user" if k in (fixed or {}) else "not identifiable from these data")
                   for k in fixed_all}
    starts = _starts(spec, curves, settings)
    res = _run_lmfit(spec, curves, settings, fixed_all, weighting, starts)
    params, corr = _collect(spec, res, fixed_notes)
    per, rms, r2 = _stats(spec, curves, {k: p.value for k, p in params.items()}, settings)
    notes = list(load_notes)
    notes += [f"{c.name}: {n}" for c in curves for n in c.notes]
    notes += id_notes + _bound_notes(res)
    if spec.name == "johnson-cook" and "m" in fixed_all and _max_rise(curves) > 1.0:
        notes.append(_m_sensitivity(spec, curves, settings, fixed_all, weighting, starts, res))
    if "temperature" not in spec.variables:
        _, temps, _ = _data_levels(curves, rate_tolerance, temperature_tolerance)
        if len(temps) > 1:
            notes.append(f"{spec.name} has no temperature term but the curves span {_fmt_levels(temps, 'K')}")
    boot = None
    if draws:
        boot = _bootstrap(spec, curves, settings, fixed_all, weighting, res, int(draws), seed, shared_errors)
        params, corr = _with_bootstrap(params, boot), _pairs(boot)
        notes.append(_bootstrap_note(boot, shared_errors))
    result = FitResult(
        model=spec.name, method="global", parameters=params, correlations=corr, settings=settings,
        curves=curves, curve_stats=per, rms=rms, r_squared=r2, n_points=int(n_pts), notes=notes,
        success=bool(res.success), message=str(res.message), model_spec=spec, bootstrap=boot,
    )
    if staged:
        if spec.name != "johnson-cook":
            raise InputError("the staged route is defined for johnson-cook only", "staged")
        result.staged = _staged_johnson_cook(spec, curves, settings, fixed or {}, weighting, rate_tolerance,
                                             temperature_tolerance)
    return result


#: Johnson–Cook m values of the sensitivity note when m is fixed on heated curves.
M_SENSITIVITY = (0.5, 1.0, 2.0)


def _m_sensitivity(spec, curves, settings, fixed, weighting, starts, res):
    """The note on a fixed Johnson–Cook m with adiabatic heating: the other parameters refitted at m = 0.5, 1, 2.

    With every shot at one initial temperature, m acts only through the heating along the curves, which rests on
    the assumed Taylor–Quinney coefficient and trades against strain hardening (tests/test_fit_uncertainty.py:
    with shots' 1 % scale errors, fits at m = 1, 2 and 4 describe such data about equally well). So m is an
    assumption, and the note shows what it does to A, B, n and C, with each fit's RMS.
    """
    m_fixed = float(fixed["m"])
    shown, rms_at = [], {}
    weights = _weights(curves, weighting)
    for m in sorted(set(M_SENSITIVITY) | {m_fixed}):
        r = res if m == m_fixed else _run_lmfit(spec, curves, settings, {**fixed, "m": m}, weighting, starts)
        v = {k: float(r.params[k].value) for k in ("A", "B", "n", "C")}
        rms_at[m] = float(np.sqrt(np.mean((r.residual / weights / 1e6) ** 2)))
        shown.append(f"m = {m:g}: A {v['A'] / 1e6:.4g} MPa, B {v['B'] / 1e6:.4g} MPa, n {v['n']:.3g}, "
                     f"C {v['C']:.3g} (RMS {rms_at[m]:.3g} MPa)")
    best = min(rms_at, key=rms_at.get)
    hint = (f"; the RMS is lowest at m = {best:g} here, a hint that leans on the same assumptions, not a fit"
            if best != m_fixed and rms_at[m_fixed] > 1.1 * rms_at[best] else "")
    T0 = sorted({round(c.temperature, 1) for c in curves})
    return (f"m = {m_fixed:g} is an assumption, not a result: every curve starts at {_fmt_levels(T0, 'K')}, so m "
            f"acts only through the adiabatic temperature rise along the curves (up to {_max_rise(curves):.3g} K), "
            "which rests on the assumed Taylor-Quinney coefficient and trades against strain hardening; the other "
            "parameters follow the assumed m: " + "; ".join(shown) + hint
            + ". Test at a second initial temperature to fit m")


def _bootstrap(spec, curves, settings, fixed, weighting, res, draws, seed, shared_errors=True):
    """The bootstrap over whole curves around the lmfit result ``res`` (:func:`shpb.fit_uncertainty.bootstrap`)."""
    eps, rate, temp, sig = _arrays(curves)
    names, theta, lo, hi, logs = [], [], [], [], []
    for p in spec.parameters:
        if p.name in fixed:
            continue
        lp = res.params[f"log10_{p.name}" if p.log_scale else p.name]
        names.append(p.name)
        theta.append(lp.value)
        lo.append(lp.min)
        hi.append(lp.max)
        logs.append(p.log_scale)
    const = {k: float(v) for k, v in fixed.items()}

    def predict(values):
        rows = next(iter(values.values())).shape[0]
        with np.errstate(all="ignore"):
            out = evaluate(spec, {**const, **values}, eps, rate, temp, **settings)
        return np.broadcast_to(out, (rows, eps.size))

    terms, labels = _shared_terms(spec, curves, settings, {p.name: res.params[p.name].value for p in spec.parameters}
                                  ) if shared_errors else (None, ())
    return bootstrap(predict, np.array(theta), np.array(lo, float), np.array(hi, float), names, logs, sig,
                     _weights(curves, weighting), [c.plastic_strain.size for c in curves], eps,
                     draws=draws, seed=seed, shared=terms, shared_labels=labels)


def _shared_terms(spec, curves, settings, values):
    """Shared terms of the bootstrap (:func:`shpb.fit_uncertainty.bootstrap`): each bar set's calibration errors.

    Per bar set (:attr:`Curve.shared_group`) two terms, each one standard
    normal draw shared by all its curves: a stress scale, a_i = σ_i·u_σ
    (u_σ each curve's own bar-set share of its relative stress uncertainty),
    and a strain scale, which moves the plastic strain and the strain rate
    together (both come from the reflected wave): the data then stand
    −(∂σ/∂ln ε_p + ∂σ/∂ln ε̇)·u_ε off the law (first-order sensitivities by
    forward differences, as JCGM 100:2008 §5.1.3 allows). The two are drawn
    independent (the budget does not give their correlation).

    Returns
    -------
    terms : numpy.ndarray or None
        (K, N) [Pa]; None when no curve carries a budget.
    labels : tuple of str
        The terms in words.
    """
    groups = {}
    for j, c in enumerate(curves):
        if c.shared_group and (c.shared_stress_u or c.shared_strain_u):
            groups.setdefault(c.shared_group, []).append(j)
    if not groups:
        return None, ()
    eps, rate, temp, _ = _arrays(curves)
    h = 1e-6
    with np.errstate(all="ignore"):
        model = evaluate(spec, values, eps, rate, temp, **settings)
        slope = (evaluate(spec, values, eps * (1 + h), rate, temp, **settings) - model) / h
        slope += (evaluate(spec, values, eps, rate * (1 + h), temp, **settings) - model) / h
    edges = np.concatenate(([0], np.cumsum([c.plastic_strain.size for c in curves])))
    terms, labels = [], []
    for group, members in groups.items():
        bars = group.split(" | ")[-1] or group
        for attr, what, sens in (("shared_stress_u", "stress", model), ("shared_strain_u", "strain", -slope)):
            a = np.zeros(eps.size)
            us = []
            for j in members:
                u = getattr(curves[j], attr)
                if u:
                    a[edges[j]:edges[j + 1]] = sens[edges[j]:edges[j + 1]] * u
                    us.append(u)
            if us and np.all(np.isfinite(a)):
                terms.append(a)
                span = (f"{100 * min(us):.2g}" if f"{100 * min(us):.2g}" == f"{100 * max(us):.2g}" else
                        f"{100 * min(us):.2g}-{100 * max(us):.2g}")
                labels.append(f"{what} scale of bar set {bars} ({span} %, {len(us)} shots)")
    return (np.array(terms), tuple(labels)) if terms else (None, ())


def _with_bootstrap(params, boot):
    """Parameters with the bootstrap's u and 95 % interval [SI]."""
    out = {}
    for name, p in params.items():
        if name in boot.names:
            p = replace(p, u=boot.u[name], low=boot.low[name], high=boot.high[name])
        out[name] = p
    return out


def _pairs(boot):
    """{(a, b): r} of the bootstrap's correlation matrix (upper triangle)."""
    n = boot.names
    return {(n[i], n[j]): float(boot.correlation[i, j]) for i in range(len(n)) for j in range(i + 1, len(n))}


def _bootstrap_note(boot, shared_errors=True):
    kept = boot.draws - boot.failed
    shot = (f"shot-to-shot scale scatter {100 * boot.offset_scatter:.2g} % (curve offsets inflated "
            f"x{boot.offset_inflation:.2f} for what the fit absorbs)" if math.isfinite(boot.offset_scatter)
            else "shot level left out: too few curves beyond the parameters to estimate the scatter between shots")
    shared = (f"; with each draw the errors shared by the shots of a bar set, from their uncertainty budgets: "
              f"{'; '.join(boot.shared)} (JCGM 101:2008)" if boot.shared else
              "; errors shared by every shot (a bar set's calibration) are not in them: "
              + ("the curves carry no uncertainty budget (reduce with the uncertainty on)" if shared_errors else
                 "left out on request (--no-shared-errors)"))
    return (f"uncertainties: bootstrap over whole curves, {kept} of {boot.draws} draws refitted (seed {boot.seed}); "
            f"residual correlation length {boot.correlation_length:.3g} in plastic strain, blocks of "
            f"{boot.block_length:.3g}; {shot}; 95 % percentile intervals (Efron & Tibshirani 1993; "
            f"Kuensch 1989){shared}. A bias of the reduction shared by every shot is in no interval")


def _staged_johnson_cook(spec, curves, settings, fixed, weighting, rate_tol, temp_tol):
    """Classic staged Johnson–Cook calibration (Johnson & Cook 1983; common practice).

    Stage 1: A, B, n on curves at the reference rate and room temperature
    (C and m then play no role). Stage 2: C on all room-temperature curves
    with A, B, n held. Stage 3: m on the curves above room temperature with
    A, B, n, C held. Standard errors are conditional on earlier stages.
    """
    ref, room = settings["reference_rate"], settings["room_temperature"]
    at_room = [c for c in curves if abs(c.temperature - room) <= temp_tol]
    at_ref = [c for c in at_room if abs(math.log(c.strain_rate / ref)) <= math.log(rate_tol)]
    if not at_ref:
        rates = _levels([c.strain_rate for c in at_room] or [c.strain_rate for c in curves],
                        lambda a, b: abs(math.log(b / a)) <= math.log(rate_tol))
        raise AnalysisError(
            f"the staged Johnson-Cook route needs a curve at the reference rate ({ref:g} 1/s) and room temperature "
            f"({room:g} K); rates at room temperature: {_fmt_levels(rates, '1/s')}. "
            "Set --reference-rate to one of them"
        )
    notes, params, corr = ["staged route: standard errors of each stage assume the earlier stages exact"], {}, {}
    values = {p.name: fixed.get(p.name, p.default if p.default is not None else 0.0) for p in spec.parameters}
    stages = [
        (("A", "B", "n"), at_ref, "stage 1 (A, B, n at the reference rate and room temperature)"),
        (("C",), at_room, "stage 2 (C at room temperature)"),
        (("m",), [c for c in curves if c.temperature > room + temp_tol], "stage 3 (m above room temperature)"),
    ]
    for names, subset, label in stages:
        free = [n for n in names if n not in fixed]
        if not free:
            continue
        if names == ("C",) and len(_data_levels(subset, rate_tol, temp_tol)[0]) < 2:
            notes.append(f"{label}: one rate level only; C fixed at {values['C']:g}")
            continue
        if names == ("m",) and not subset:
            notes.append(f"{label}: no curve above room temperature; m fixed at {values['m']:g}")
            continue
        hold = {k: v for k, v in values.items() if k not in free}
        starts = _starts(spec, subset, settings) if names == ("A", "B", "n") else [{k: values[k] for k in free}, {}]
        res = _run_lmfit(spec, subset, settings, hold, weighting, starts)
        p_stage, c_stage = _collect(spec, res, {}, only=free)
        params.update(p_stage)
        corr.update(c_stage)
        values.update({k: p.value for k, p in p_stage.items()})
        notes.append(f"{label}: {len(subset)} curves, {', '.join(c.name for c in subset)}")
    for p in spec.parameters:
        if p.name not in params:
            why = "fixed by the user" if p.name in fixed else "not identifiable in the staged route"
            params[p.name] = ParameterResult(p.name, float(values[p.name]), None, p.unit, False, why,
                                             p.report_key, p.report_scale)
    params = {p.name: params[p.name] for p in spec.parameters}
    per, rms, r2 = _stats(spec, curves, values, settings)
    return FitResult(
        model=spec.name, method="staged", parameters=params, correlations=corr, settings=settings, curves=curves,
        curve_stats=per, rms=rms, r_squared=r2, n_points=int(sum(c.plastic_strain.size for c in curves)),
        notes=notes, model_spec=spec,
    )


# --------------------------------------------------------------------------
# Outputs
# --------------------------------------------------------------------------


def tabulate(result, strain_rates=None, temperatures=None, plastic_strain=None):
    """Model curves on a grid, for simulation codes.

    Parameters
    ----------
    result : FitResult
        A fit.
    strain_rates : sequence of float or str, optional
        Rates [1/s]; default: the rate levels of the data.
    temperatures : sequence of float or str, optional
        Temperatures [K]; default: the temperature levels of the data (one
        temperature, the data's median, for models without a temperature term).
    plastic_strain : array_like, optional
        Plastic strains [1]; default 0 to the largest fitted plastic strain
        in steps of 0.005.

    Returns
    -------
    pandas.DataFrame
        Columns ``plastic_strain``, ``true_stress_MPa``, ``strain_rate_per_s``,
        ``temperature_K``; one block per (temperature, rate).
    """
    rates_lv, temps_lv, _ = _data_levels(result.curves, 1.5, 5.0)
    rates = rates_lv if strain_rates is None else [to_si(r, "strain_rate", "strain_rates") for r in strain_rates]
    if temperatures is not None:
        temps = [to_si(t, "temperature", "temperatures") for t in temperatures]
    elif "temperature" in result.spec.variables:
        temps = temps_lv
    else:
        temps = [float(np.median([c.temperature for c in result.curves]))]
    if plastic_strain is None:
        top = max(float(c.plastic_strain.max()) for c in result.curves)
        plastic_strain = np.round(np.arange(0.0, top + 0.0025, 0.005), 6)
    eps = np.asarray(plastic_strain, float)
    blocks = []
    for T in temps:
        for r in rates:
            s = result.predict(eps, r, T)
            blocks.append(pd.DataFrame({"plastic_strain": eps, "true_stress_MPa": s / 1e6,
                                        "strain_rate_per_s": r, "temperature_K": T}))
    return pd.concat(blocks, ignore_index=True)


def _settings_out(settings):
    keys = {"reference_rate": "reference_rate_per_s", "room_temperature": "room_temperature_K",
            "melt_temperature": "melt_temperature_K"}
    return {keys[k]: v for k, v in settings.items()}


def _param_dict(p):
    d = {"value": p.report_value}
    if p.u is not None:
        d["u"] = p.report_u
        d["interval_95"] = list(p.report_interval)
    d["ls_stderr"] = p.report_stderr
    d["varied"] = p.varied
    if p.note:
        d["note"] = p.note
    return d


def _uncertainty_dict(boot, key):
    """The bootstrap's settings and correlation matrix for the output files (names with units)."""
    return {
        "method": "bootstrap over whole curves: shot-level relative offsets resampled between curves, residuals "
                  "within a curve by circular blocks (Efron & Tibshirani 1993; Kuensch 1989)",
        "draws": boot.draws, "failed_draws": boot.failed, "seed": boot.seed, "level": boot.level,
        "correlation_length_plastic_strain": boot.correlation_length,
        "block_length_plastic_strain": boot.block_length,
        "shot_offset_scatter_percent": 100.0 * boot.offset_scatter,
        "offset_inflation": boot.offset_inflation,
        "shared_terms": list(boot.shared),
        "not_included": ("a bias of the reduction common to every shot" if boot.shared else
                         "errors common to every shot (shared bar or gauge calibration, a bias of the reduction)"),
        "correlation_matrix": {"parameters": [key[n] for n in boot.names],
                               "matrix": [[float(x) for x in row] for row in boot.correlation]},
    }


def _result_dict(result):
    spec = result.spec
    params = {p.report_key: _param_dict(p) for p in result.parameters.values()}
    key = {p.name: p.report_key for p in spec.parameters}
    corr = {f"{key.get(a, a)} | {key.get(b, b)}": r for (a, b), r in result.correlations.items()}
    stats = {c.name: c for c in result.curve_stats}
    curves = []
    for c in result.curves:
        s = stats[c.name]
        d = {"name": c.name, "kind": c.kind, "source": c.source, "material": c.material,
             "strain_rate_per_s": c.strain_rate, "temperature_K": c.temperature,
             "plastic_strain_range": [float(c.plastic_strain.min()), float(c.plastic_strain.max())],
             "n_points": s.n_points, "rms_MPa": s.rms / 1e6, "r_squared": s.r_squared,
             "modulus_GPa": None if c.modulus is None else c.modulus / 1e9, "modulus_source": c.modulus_source}
        if c.temperature_rise is not None:
            d["max_temperature_rise_K"] = float(np.max(c.temperature_rise))
        curves.append(d)
    return {
        "model": spec.name, "method": result.method, "equation": spec.equation, "reference": spec.reference,
        "parameters": params, "settings": _settings_out(result.settings), "correlations": corr,
        "correlations_from": "bootstrap" if result.bootstrap is not None else "least-squares covariance",
        **({"uncertainty": _uncertainty_dict(result.bootstrap, key)} if result.bootstrap is not None else {}),
        "statistics": {"rms_MPa": result.rms / 1e6, "r_squared": result.r_squared, "n_points": result.n_points,
                       "n_curves": len(result.curves)},
        "curves": curves, "notes": list(result.notes),
    }


def fit_to_dict(result):
    """Everything :func:`write_fit` puts in the JSON file, as a plain dict."""
    out = {"package_version": __version__, **_result_dict(result),
           "success": result.success, "message": result.message}
    if result.staged is not None:
        out["staged"] = _result_dict(result.staged)
    return to_plain(out)


def _toml_dict(result):
    d = _result_dict(result)
    out = {"model": d["model"], "method": d["method"], "equation": d["equation"], "reference": d["reference"],
           "package_version": __version__,
           "parameters": {k: v["value"] for k, v in d["parameters"].items()},
           "u": {k: v["u"] for k, v in d["parameters"].items() if "u" in v},
           "interval_95": {k: v["interval_95"] for k, v in d["parameters"].items() if "interval_95" in v},
           "ls_stderr": {k: v["ls_stderr"] for k, v in d["parameters"].items() if v["ls_stderr"] is not None},
           "fixed": [k for k, v in d["parameters"].items() if not v["varied"]],
           "settings": d["settings"], "statistics": d["statistics"],
           "curves": d["curves"],
           "notes": d["notes"]}
    if "uncertainty" in d:
        out["uncertainty"] = d["uncertainty"]
    if result.staged is not None:
        s = _result_dict(result.staged)
        out["staged"] = {"parameters": {k: v["value"] for k, v in s["parameters"].items()},
                         "statistics": s["statistics"], "notes": s["notes"]}
    # TOML has no null: None, NaN and inf (e.g. R² of a flat curve, T_m = inf) are left out, so that a
    # simulation input deck reading this file meets only finite numbers
    return to_plain(out, nonfinite="omit", none="omit")


def _default_flow_strain(result):
    """A plastic strain most curves reach: the median of the curves' mid-range strains."""
    mids = [0.5 * (c.plastic_strain.min() + c.plastic_strain.max()) for c in result.curves]
    return float(np.median(mids))


def plot_fit(result, flow_strain=None):
    """Figure sheet of a fit: data and fit per curve, residuals, rate sensitivity, parameters.

    Each curve has its own colour (and, past seven curves, its own line style
    and marker) from the shot palette :data:`shpb.style.SHOT_COLOURS`, with
    its rate in the legend; the legends sit in the text panel, off the data.

    Parameters
    ----------
    result : FitResult
        A fit.
    flow_strain : float, optional
        Plastic strain of the rate-sensitivity panel [1]; default the median
        mid-range strain of the curves.

    Returns
    -------
    matplotlib.figure.Figure
        Built without pyplot; :func:`write_fit` saves it as ``fit_sheet.png``.
    """
    from matplotlib.figure import Figure  # no pyplot: no global state, the user's backend untouched
    from matplotlib.lines import Line2D

    from .report import plain_log_axis
    from .style import shot_style

    if flow_strain is None:
        flow_strain = _default_flow_strain(result)
    fig = Figure(figsize=(12, 9), layout="constrained")
    ax_fit, ax_res, ax_rate, ax_txt = fig.subplots(2, 2).ravel()
    rates = [c.strain_rate for c in result.curves]
    # one colour (and, past seven, line style) per curve, so that the legend tells every shot apart; the rate
    # is in each label
    order = sorted(range(len(result.curves)), key=lambda k: (result.curves[k].temperature,
                                                              result.curves[k].strain_rate))
    styles = {k: shot_style(i) for i, k in enumerate(order)}
    handles = []
    for k in order:
        c, st = result.curves[k], styles[k]
        pred = result.predict(c.plastic_strain, c.strain_rate, c.temperatures)
        rate = f"{c.strain_rate:.0f}" if c.strain_rate >= 10 else f"{c.strain_rate:.3g}"
        label = f"{c.name}: {rate} 1/s, {c.temperature:.0f} K"
        ax_fit.plot(c.plastic_strain, c.stress / 1e6, st["marker"], ms=2.5, color=st["color"], alpha=0.5)
        ax_fit.plot(c.plastic_strain, pred / 1e6, st["linestyle"], color=st["color"], lw=1.5)
        if result.staged is not None:
            ps = result.staged.predict(c.plastic_strain, c.strain_rate, c.temperatures)
            ax_fit.plot(c.plastic_strain, ps / 1e6, "--", color=st["color"], lw=1.0)
        ax_res.plot(c.plastic_strain, (c.stress - pred) / 1e6, st["linestyle"], color=st["color"], lw=1.0)
        handles.append(Line2D([], [], color=st["color"], ls=st["linestyle"], marker=st["marker"], ms=3, lw=1.5,
                              label=label))
    ax_fit.set(xlabel="true plastic strain [1]", ylabel="true stress [MPa]",
               title=f"{result.model}: data (dots) and fit (lines" + (", dashed: staged)" if result.staged else ")"))
    ax_res.axhline(0.0, color="k", lw=0.8)
    ax_res.set(xlabel="true plastic strain [1]", ylabel="data − model [MPa]",
               title=f"residuals (RMS {result.rms / 1e6:.3g} MPa, R² {result.r_squared:.4f})")
    # Rate sensitivity at one plastic strain, per temperature level: black and greys with line styles, so that
    # they are not read as shots
    _, temps, _ = _data_levels(result.curves, 1.5, 5.0)
    greys = ("#000000", "0.45", "0.7")
    t_style = {T: {"color": greys[i % 3], "linestyle": ("-", "--", ":")[(i // 3) % 3]} for i, T in enumerate(temps)}
    r_line = np.logspace(np.log10(min(rates)) - 0.5, np.log10(max(rates)) + 0.5, 100)
    t_handles = []
    for T in temps:
        t_handles += ax_rate.plot(r_line, result.predict(flow_strain, r_line, T) / 1e6, t_style[T]["linestyle"],
                                  color=t_style[T]["color"], label=f"model at {T:.0f} K")
    for c in result.curves:
        if c.plastic_strain.min() <= flow_strain <= c.plastic_strain.max():
            T = min(temps, key=lambda t: abs(t - c.temperature))
            ax_rate.plot(c.strain_rate, np.interp(flow_strain, c.plastic_strain, c.stress) / 1e6, "o",
                         color=t_style[T]["color"])
    ax_rate.set_xscale("log")
    plain_log_axis(ax_rate.xaxis)  # plain numbers; minor labels only where they cannot collide
    ax_rate.set(xlabel="strain rate [1/s]", ylabel="true stress [MPa]",
                title=f"rate sensitivity at plastic strain {flow_strain:.3g} (dots: data)")
    ax_txt.axis("off")
    # the report without its notes (they are in the JSON file and on the console), so the legends below stay clear
    text = fit_report(result, width=70, notes=False)
    if result.bootstrap is not None:
        b = result.bootstrap
        text += (f"\nu and 95 % intervals: bootstrap over whole curves ({b.draws - b.failed} draws),"
                 f"\n  residual correlation length {b.correlation_length:.2g}, blocks of {b.block_length:.2g}"
                 + (",\n  with the bar sets' shared calibration errors" if b.shared else
                    ";\n  no shared calibration errors (no uncertainty budget)"))
    ax_txt.text(0.0, 1.0, text, va="top", ha="left", family="monospace", fontsize=7.5, transform=ax_txt.transAxes)
    # the legends in the text panel, off the data: the curves (shots) and the model's temperatures
    if len(handles) <= 21:
        leg = ax_txt.legend(handles=handles, loc="lower left", fontsize=7, ncol=1 if len(handles) <= 10 else 2,
                            title="curves (data and fit)", title_fontsize=7, frameon=False)
        ax_txt.add_artist(leg)
    ax_txt.legend(handles=t_handles, loc="lower right", fontsize=7, title="rate sensitivity", title_fontsize=7,
                  frameon=False)
    return fig


def _residual_table(result):
    rows = []
    for c in result.curves:
        pred = result.predict(c.plastic_strain, c.strain_rate, c.temperatures)
        rows.append(pd.DataFrame({
            "curve": c.name, "plastic_strain": c.plastic_strain, "true_stress_MPa": c.stress / 1e6,
            "model_stress_MPa": pred / 1e6, "residual_MPa": (c.stress - pred) / 1e6,
            "strain_rate_per_s": c.strain_rate, "temperature_K": c.temperatures,
        }))
    return pd.concat(rows, ignore_index=True)


def write_fit(result, out_dir, *, strain_rates=None, temperatures=None, plastic_strain=None, flow_strain=None,
              figure=True):
    """Write a fit's files into ``out_dir`` (created if needed), each atomically.

    Files: ``fit_parameters.json`` (parameters with standard errors,
    correlations, settings, per-curve statistics and data provenance, notes,
    staged route if any), ``fit_parameters.toml`` (the same, flat, for
    simulation input decks), ``model_curves.csv`` (:func:`tabulate`),
    ``fit_data.csv`` (fitted points, model and residual per curve) and
    ``fit_sheet.png`` (figure sheet).

    Parameters
    ----------
    result : FitResult
        A fit.
    out_dir : str or Path
        Output folder.
    strain_rates, temperatures, plastic_strain
        Passed to :func:`tabulate` ([1/s], [K], [1]).
    flow_strain : float, optional
        Plastic strain of the rate-sensitivity panel [1]; default the median
        mid-range strain of the curves.
    figure : bool
        Write the PNG sheet.

    Returns
    -------
    dict
        File kind -> Path.
    """
    import tomli_w

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    paths = {"json": out / "fit_parameters.json", "toml": out / "fit_parameters.toml",
             "curves": out / "model_curves.csv", "data": out / "fit_data.csv"}
    atomic_write_text(paths["json"], json.dumps(fit_to_dict(result), indent=2, ensure_ascii=False) + "\n")
    atomic_write_text(paths["toml"], tomli_w.dumps(_toml_dict(result)))
    table = tabulate(result, strain_rates, temperatures, plastic_strain)
    atomic_write_csv(paths["curves"], table, float_format="%.8g")
    atomic_write_csv(paths["data"], _residual_table(result), float_format="%.8g")
    if figure:
        paths["figure"] = out / "fit_sheet.png"
        atomic_savefig(plot_fit(result, None if flow_strain is None else float(flow_strain)), paths["figure"],
                       dpi=110)
    return paths


def _g(x, digits):
    return f"{x:.{digits}g}"


def fit_report(result, width=100, notes=True):
    """A short plain-text report: parameters with u and 95 % interval, correlations, quality, notes.

    With a bootstrap (:attr:`FitResult.bootstrap`) each varied parameter shows
    its standard uncertainty u and 95 % interval, then the correlation
    matrix; without one, the least-squares standard error, labelled as such.
    ``notes=False`` leaves the notes out (the figure sheet's panel).
    """
    spec_units = {p.name: p.report_unit or ("" if p.unit == "1" else p.unit) for p in result.spec.parameters}
    lines = [f"model {result.model} ({result.method} fit of {len(result.curves)} curves, "
             f"{result.n_points} points)"]
    for p in result.parameters.values():
        unit = spec_units.get(p.name, "")
        head = f"  {p.name:<4} = {p.report_value:.6g}{' ' + unit if unit else ''}"
        if not p.varied:
            lines.append(f"{head}  (fixed)")
        elif p.u is not None:
            lo, hi = p.report_interval
            lines.append(f"{head}  u {_g(p.report_u, 2)}, 95 % interval [{_g(lo, 5)}, {_g(hi, 5)}]")
        elif p.report_stderr is not None:
            lines.append(f"{head}  (least-squares standard error {_g(p.report_stderr, 2)}: assumes independent "
                         "residuals, not an uncertainty)")
        else:
            lines.append(head)
    lines.append(f"  RMS residual {result.rms / 1e6:.3g} MPa, R² {result.r_squared:.4f}")
    boot = result.bootstrap
    if boot is not None and len(boot.names) > 1:
        keys = {p.name: p.report_key for p in result.spec.parameters}
        cols = [keys[n] for n in boot.names]
        w = max(8, max(len(c) for c in cols) + 1)
        lines.append("  correlation matrix of the parameters (bootstrap):")
        lines.append("    " + " " * w + "".join(f"{c:>{w}}" for c in cols))
        for c, row in zip(cols, boot.correlation):
            lines.append(f"    {c:<{w}}" + "".join(f"{x:>{w}.3f}" for x in row))
    elif boot is None:
        strong = [(a, b, r) for (a, b), r in result.correlations.items() if abs(r) > 0.95]
        for a, b, r in strong:
            lines.append(f"  strong correlation {a}-{b}: {r:+.3f} (least-squares covariance)")
    if result.staged is not None:
        s = result.staged
        vals = ", ".join(f"{p.name}={p.report_value:.4g}" for p in s.parameters.values())
        lines.append(f"staged route: {vals}; RMS {s.rms / 1e6:.3g} MPa, R² {s.r_squared:.4f}")
    for n in result.notes if notes else ():
        text = f"note: {n}"
        while len(text) > width:
            cut = text.rfind(" ", 0, width)
            cut = cut if cut > 10 else width
            lines.append(text[:cut])
            text = "      " + text[cut:].lstrip()
        lines.append(text)
    return "\n".join(lines)
