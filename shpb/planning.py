"""Test planning at the file edge: the plan file, the virtual-shot preview, the campaign skeleton and the sheet.

:mod:`shpb.plan` chooses a shot's settings with fast planning models. This
module reads a plan file (``docs/planning.md``), plans every target of its
test matrix, **previews** each design by simulating it (:mod:`shpb.simulate`
through :func:`shpb.virtual.simulate_setup`, the path ``shpb simulate``
takes) and reducing the virtual record with the reduction a real shot gets
(:func:`shpb.reduce.reduce_shot`), adjusts the design when the preview
misses its targets, and writes the plan: a ``plan.json`` with every number,
a ``shots.csv`` and ``campaign.toml`` skeleton ready for ``shpb batch``, the
previews' records and shot files, and a planning sheet (:func:`plot_plan`).

Every design states the bar stress against the yield strength and the
striker's kinetic energy, and a design whose bar stress reaches the yield
strength is refused unless allowed. A plan does not replace the
laboratory's safety rules, local codes and licensed practice.
"""

from __future__ import annotations

import dataclasses
import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

import numpy as np

from .errors import AnalysisError, InputError
from .plan import (STANDARD_SAMPLE_RATES, Constraints, MaterialEstimate, Rig, ShaperStock, ShotDesign, Target,
                   adjust_design, design_shot, flow_table)
from .setup import _Table, read_toml
from .units import to_si

__all__ = [
    "SAFETY",
    "PREVIEW_TOLERANCE",
    "TARGET_TOLERANCE",
    "PlanFile",
    "Preview",
    "PlannedShot",
    "CampaignPlan",
    "load_plan",
    "with_targets",
    "strain_noise",
    "preview_design",
    "plan_target",
    "flow_tables",
    "plan_campaign",
    "shots_table_text",
    "campaign_toml_text",
    "plan_summary",
    "write_plan",
    "plot_plan",
    "report_lines",
]

#: Printed with every plan and written into every plan file.
SAFETY = ("A plan is a forecast, not a clearance to fire: the laboratory's safety rules, its gas-gun procedures, "
          "local codes and licensed practice always prevail. Curves from planned shots used for design need "
          "independent validation.")
#: A preview within this relative error of the target rate and strain ends the adjustment [1].
PREVIEW_TOLERANCE = 0.05
#: A planned shot meets its target when its preview is valid and within this relative error of the target
#: mean rate and final strain [1].
TARGET_TOLERANCE = 0.10
#: Files ``write_plan`` writes in its output folder (previews go in PREVIEW_DIR).
PLAN_FILES = {"plan": "plan.json", "shots": "shots.csv", "campaign": "campaign.toml", "figure": "plan.png"}
PREVIEW_DIR = "previews"
#: Folder, relative to the campaign file, where the skeleton expects each shot's record.
RECORD_DIR = "raw"


# =========================================================================== the plan file
@dataclass(frozen=True, eq=False)
class PlanFile:
    """A plan file, read (all SI).

    Attributes
    ----------
    name : str
    materials : dict
        Name -> :class:`shpb.plan.MaterialEstimate`.
    targets : tuple of Target
        One per material and strain rate.
    repeats : int
        Shots per target in the campaign skeleton.
    constraints : shpb.plan.Constraints
    preview : dict
        ``noise_V`` (rms), ``bits``, ``previews`` (most previews per target), ``seed``.
    source : str
    striker_diameter : float or None
        The strikers' diameter [m] when the plan file gives one (else the bar set's).
    """

    name: str
    materials: dict
    targets: tuple
    repeats: int
    constraints: Constraints
    preview: dict
    source: str
    striker_diameter: Optional[float] = None


_MATERIAL_KEYS = {"material", "modulus", "density", "poisson_ratio", "uncertainty", "temperature", "law",
                  "stress_measure", "yield_stress", "A", "B", "n", "C", "reference_rate"}
_SHAPER_KEYS = {"modulus", "density", "law", "stress_measure", "yield_stress", "A", "B", "n", "C", "reference_rate",
                "diameters", "thickness_range"}


def _quantities(t: _Table, key, dimension, *, default=None, count=None):
    """A list of quantities (or one quantity, as a list) of a table."""
    if not t.has(key):
        if default is None:
            raise InputError(f"missing key {key!r} (a list of {dimension} values with units)", t.where)
        return tuple(default)
    raw = t.data[key]
    values = raw if isinstance(raw, list) else [raw]
    if not values:
        raise InputError("expected at least one value", t._key(key))
    out = tuple(to_si(v, dimension, f"{t._key(key)}[{i}]") for i, v in enumerate(values))
    if any(not v > 0 for v in out):
        raise InputError(f"expected positive values, got {raw!r}", t._key(key))
    if count is not None and len(out) != count:
        raise InputError(f"expected {count} values, got {len(out)}", t._key(key))
    return out


def _fraction(t: _Table, key, default, *, high=1.0):
    value = t.data.get(key, default)
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0 <= value < high:
        raise InputError(f"expected a number from 0 to {high:g}, got {value!r}", t._key(key))
    return float(value)


def _material(name, t: _Table) -> MaterialEstimate:
    from .virtual import _law  # the one reader of a law table (simulation setup files use it too)

    t.check_keys(_MATERIAL_KEYS)
    modulus = t.quantity("modulus", "pressure")
    if not t.has("poisson_ratio"):
        raise InputError("missing key 'poisson_ratio' (the specimen's Poisson ratio, for its length)", t.where)
    nu = _fraction(t, "poisson_ratio", None, high=0.5)
    if not t.has("law"):
        raise InputError("missing key 'law' (perfectly-plastic with yield_stress, or johnson-cook)", t.where)
    law, desc = _law(t, modulus)
    if law is None:
        raise InputError("a specimen estimate needs a plastic law (perfectly-plastic or johnson-cook)", t._key("law"))
    return MaterialEstimate(name=str(t.data.get("material", name)), modulus=modulus,
                            density=t.quantity("density", "density"), poisson_ratio=nu, law=law,
                            law_description=desc, uncertainty=_fraction(t, "uncertainty", 0.0, high=0.9),
                            temperature=t.quantity("temperature", "temperature", required=False))


def _shaper(name, t: _Table) -> ShaperStock:
    from .virtual import _law

    t.check_keys(_SHAPER_KEYS)
    modulus = t.quantity("modulus", "pressure")
    law, desc = _law(t, modulus)
    if law is None:
        raise InputError("a shaper of this model deforms plastically: give law = 'johnson-cook' or "
                         "'perfectly-plastic' (Frew, Forrestal & Chen 2002)", t._key("law"))
    rng = _quantities(t, "thickness_range", "length", default=(0.2e-3, 2.0e-3), count=2)
    if rng[0] > rng[1]:
        raise InputError(f"expected [thinnest, thickest], got {t.data['thickness_range']!r}", t._key("thickness_range"))
    return ShaperStock(name=name, modulus=modulus, density=t.quantity("density", "density"), law=law,
                       law_description=desc, diameters=_quantities(t, "diameters", "length"), thickness_range=rng)


def load_plan(path) -> PlanFile:
    """Read a plan file (``docs/planning.md``); every error names the file and the key."""
    path = Path(path)
    src = str(path)
    top = _Table(read_toml(path), f"{src}:")
    top.check_keys({"name", "materials", "targets", "constraints", "shapers", "preview"})
    name = top.string("name", default=path.stem)
    mats = top.table("materials")
    if not mats.data:
        raise InputError("expected at least one material table, e.g. [materials.alloy-1]", mats.where)
    materials = {key: _material(key, mats.table(key)) for key in mats.data}
    shapers = top.table("shapers", required=False)
    stocks = tuple(_shaper(key, shapers.table(key)) for key in shapers.data) if shapers else ()

    tg = top.table("targets")
    tg.check_keys({"strain_rates", "strain", "repeats", "temperature", "materials"})
    rates = _quantities(tg, "strain_rates", "strain_rate")
    raw_strain = tg.data.get("strain")
    strains = raw_strain if isinstance(raw_strain, list) else [raw_strain] * len(rates)
    if raw_strain is None or len(strains) != len(rates) or not all(
            isinstance(s, (int, float)) and not isinstance(s, bool) and 0 < s < 0.9 for s in strains):
        raise InputError(f"expected an engineering strain between 0 and 0.9, or a list of one per rate, got "
                         f"{raw_strain!r}", tg._key("strain"))
    chosen = tg.data.get("materials", list(materials))
    if not isinstance(chosen, list) or any(m not in materials for m in chosen):
        raise InputError(f"expected a list of material names from [materials] ({', '.join(materials)}), got "
                         f"{chosen!r}", tg._key("materials"))
    repeats = tg.data.get("repeats", 1)
    if isinstance(repeats, bool) or not isinstance(repeats, int) or not 1 <= repeats <= 26:
        raise InputError(f"expected a whole number of shots from 1 to 26, got {repeats!r}", tg._key("repeats"))
    temperature = tg.quantity("temperature", "temperature", required=False)
    targets = tuple(Target(m, r, float(s), temperature if temperature is not None else materials[m].temperature)
                    for m in chosen for r, s in zip(rates, strains))

    ct = top.table("constraints")
    ct.check_keys({"strikers", "striker_diameter", "speed_range", "specimen_diameters", "bar_stress_limit",
                   "sample_rates"})
    speed = _quantities(ct, "speed_range", "velocity", count=2)
    if speed[0] >= speed[1]:
        raise InputError(f"expected [slowest, fastest], got {ct.data['speed_range']!r}", ct._key("speed_range"))
    limit = _fraction(ct, "bar_stress_limit", 0.8)
    if not limit > 0:
        raise InputError("expected a fraction of the yield strength above 0", ct._key("bar_stress_limit"))
    constraints = Constraints(strikers=_quantities(ct, "strikers", "length"), speed_range=speed,
                              specimen_diameters=_quantities(ct, "specimen_diameters", "length"), shapers=stocks,
                              bar_stress_limit=limit,
                              sample_rates=_quantities(ct, "sample_rates", "frequency", default=STANDARD_SAMPLE_RATES))

    pv = top.table("preview", required=False) or _Table({}, f"{src}: preview")
    pv.check_keys({"noise", "bits", "previews", "seed"})
    noise = to_si(pv.data.get("noise", "2 mV"), "voltage", pv._key("noise"))
    ints = {}
    for key, default, low, high in (("bits", 12, 2, 24), ("previews", 3, 1, 6), ("seed", 1, 0, 2**31)):
        value = pv.data.get(key, default)
        if isinstance(value, bool) or not isinstance(value, int) or not low <= value <= high:
            raise InputError(f"expected a whole number from {low} to {high}, got {value!r}", pv._key(key))
        ints[key] = value
    return PlanFile(name=name, materials=materials, targets=targets, repeats=repeats, constraints=constraints,
                    preview={"noise_V": noise, **ints}, source=src,
                    striker_diameter=ct.quantity("striker_diameter", "length", required=False))


def with_targets(plan: PlanFile, *, rates=None, strain=None, materials=None, repeats=None) -> PlanFile:
    """The plan with its targets replaced: strain rates [1/s], one strain [1], a subset of its materials, repeats.

    Raises InputError naming the command-line option for a value out of range.
    """
    if materials is not None:
        unknown = [m for m in materials if m not in plan.materials]
        if unknown:
            raise InputError(f"unknown material {unknown[0]!r} (the plan file has: {', '.join(plan.materials)})",
                             "--material")
    if strain is not None and not 0 < strain < 0.9:
        raise InputError(f"expected an engineering strain between 0 and 0.9, got {strain!r}", "--strain")
    if rates is not None and any(not r > 0 for r in rates):
        raise InputError("expected positive strain rates", "--rate")
    if repeats is not None and not 1 <= repeats <= 26:
        raise InputError(f"expected a whole number of shots from 1 to 26, got {repeats!r}", "--repeats")
    old = plan.targets
    names = list(dict.fromkeys(t.material for t in old)) if materials is None else list(materials)
    per_rate = {}  # the plan's strain at each of its rates
    for t in old:
        per_rate.setdefault(t.strain_rate, t.strain)
    rates = list(per_rate) if rates is None else list(rates)
    default = old[0].strain if old else None
    temperature = {t.material: t.temperature for t in old}
    targets = tuple(Target(m, r, strain if strain is not None else per_rate.get(r, default),
                           temperature.get(m, plan.materials[m].temperature)) for m in names for r in rates)
    return dataclasses.replace(plan, targets=targets, repeats=plan.repeats if repeats is None else repeats)


# =========================================================================== the preview
@dataclass(frozen=True, eq=False)
class Preview:
    """A design simulated and reduced as a real shot would be.

    Attributes
    ----------
    result : shpb.reduce.ShotResult or None
        The reduction of the virtual record (its stages dropped); None when
        the reduction failed.
    valid : bool
        The reduction's verdict (no error flag).
    mean_rate : float
        ``mean_strain_rate_per_s`` of the reduction [1/s].
    final_strain : float
        ``max_strain`` of the reduction [1].
    flags : tuple of str
        Flag codes of the reduction (or the failure).
    files : dict
        The preview's files when written (record, shot, truth).
    shot : shpb.virtual.VirtualShot or None
        The virtual shot (kept by :func:`preview_design`, dropped once its files are written).
    """

    result: object
    valid: bool
    mean_rate: float
    final_strain: float
    flags: tuple = ()
    files: dict = field(default_factory=dict)
    shot: object = None


def _setup(design: ShotDesign, barset, options: dict, name: str):
    """The simulation setup of a design, as a simulation setup file would give it (``shpb.virtual``)."""
    from .simulate import RecorderSpec, model_duration, trigger_time
    from .virtual import SimulationSetup

    spec, rec = design.spec, design.record
    gi, gt = barset.incident_gauge, barset.transmitted_gauge
    recorder = RecorderSpec(sample_rate=rec["sample_rate_Hz"], duration=rec["record_length_s"],
                            pre_trigger=rec["pre_trigger_s"], trigger="incident-gauge", bits=options["bits"],
                            full_scale=(gi.full_scale or 5.0, gt.full_scale or 5.0),
                            noise_volts=(options["noise_V"],) * 2, seed=options["seed"])
    spec = dataclasses.replace(spec, duration=model_duration(trigger_time(spec, recorder), recorder))
    m = design.material
    info = {"material": m.name, "temperature": design.target.temperature, "modulus": m.modulus,
            "density": m.density, "law": m.law_description}
    yields = design.safety["yield_strength_MPa"]
    return SimulationSetup(name=name, kind="specimen", spec=spec, recorder=recorder, barset=barset,
                           barset_path=Path(barset.source) if barset.source else Path("barset.toml"),
                           dispersion=True, specimen=info, yield_strength=None if yields is None else yields * 1e6,
                           source=f"plan {name}")


def preview_design(design: ShotDesign, barset, options: dict, *, name="preview", allow_bar_yield=False) -> Preview:
    """Simulate a design (dispersion in the record, noise, quantisation) and reduce it like a real shot.

    The virtual shot is made by :func:`shpb.virtual.simulate_setup` (which
    refuses a bar stress at yield unless ``allow_bar_yield``) and reduced by
    :func:`shpb.reduce.reduce_shot` on the record held in memory, with the
    analysis defaults a shot file gets. The virtual shot is kept in the
    preview (:func:`shpb.virtual.write_virtual_shot` writes its record,
    ready-to-reduce shot file and truth table).
    """
    from .io import Record
    from .reduce import reduce_shot
    from .setup import AnalysisOptions, Shot, Specimen
    from .virtual import simulate_setup

    try:
        shot = simulate_setup(_setup(design, barset, options, name), allow_bar_yield=allow_bar_yield)
    except AnalysisError as exc:  # e.g. the virtual shot crushes the shaper: no preview, the plan goes on
        return Preview(None, False, math.nan, math.nan, (f"failed: {exc}",))
    rec = shot.record
    sp, m = design.spec.specimen, design.material
    reduced = Shot(name, barset, Specimen(sp.length, sp.diameter, m.name, design.target.temperature, m.modulus,
                                          m.density), analysis=AnalysisOptions())
    try:
        result = reduce_shot(reduced, Record.from_arrays(rec.volts_incident, rec.volts_transmitted, time=rec.time))
    except AnalysisError as exc:
        return Preview(None, False, math.nan, math.nan, (f"failed: {exc}",), shot=shot)
    res = result.summary["results"]
    return Preview(dataclasses.replace(result, stages=None), bool(result.valid),
                   float(res.get("mean_strain_rate_per_s", math.nan)), float(res.get("max_strain", math.nan)),
                   tuple(f.code for f in result.flags), shot=shot)


def _off(value, aim):
    return value / aim - 1.0 if aim and math.isfinite(value) else math.inf


@dataclass(frozen=True, eq=False)
class PlannedShot:
    """One target planned: the kept design, its preview (None without), and every preview with what the
    adjustment changed after it (``history``: dicts of settings, forecast, reached values, flags, ``change``)."""

    design: ShotDesign
    preview: Optional[Preview]
    history: tuple = ()

    @property
    def name(self) -> str:
        """``<material>-<rate>``, e.g. ``HR-A61-2500``."""
        return f"{self.design.target.material}-{self.design.target.strain_rate:g}"

    @property
    def met(self) -> bool:
        """The preview is valid and within :data:`TARGET_TOLERANCE` of the target rate and strain."""
        pv, t = self.preview, self.design.target
        return pv is not None and pv.valid and abs(_off(pv.mean_rate, t.strain_rate)) <= TARGET_TOLERANCE \
            and abs(_off(pv.final_strain, t.strain)) <= TARGET_TOLERANCE


def strain_noise(barset, options: dict) -> float:
    """Rms noise of a recorded bar strain [1]: the recorder's noise and quantisation through the noisier bridge.

    ``options`` holds ``noise_V`` (rms) and ``bits``; each gauge's ``full_scale``
    (or 5 V) sets the quantisation step ``2 full_scale / 2**bits``, whose rms is
    the step over sqrt(12) (common practice); the bridge's volts per strain
    come from :func:`shpb.bridge.bar_volts`.
    """
    from .bridge import bar_volts

    worst = 0.0
    for gauge, bar in ((barset.incident_gauge, barset.incident), (barset.transmitted_gauge, barset.transmitted)):
        def volts(e):
            return float(bar_volts(e, bridge=gauge.bridge, gauge_factor=gauge.gauge_factor,
                                   excitation=gauge.excitation, gain=gauge.gain, polarity=gauge.polarity,
                                   scale=gauge.scale, poisson_ratio=bar.poisson_ratio))

        slope = abs(volts(1e-6) - volts(0.0)) / 1e-6  # V per unit strain
        step = 2.0 * (gauge.full_scale or 5.0) / 2 ** options["bits"]
        worst = max(worst, math.hypot(options["noise_V"], step / math.sqrt(12.0)) / slope)
    return worst


def _check_safety(design: ShotDesign, allow_bar_yield: bool, where: str):
    from .simulate import check_plan

    check_plan(design.safety, allow_bar_yield, where)


def _reached(design: ShotDesign, pv: Preview):
    """(rate, strain, rate span) of a preview as the adjustment reads it.

    A valid preview's rate is its reduction's mean over the valid part,
    whose times are the span; without a valid part (the reduction's mean is
    then the peak) or with one over less than half the loading (its mean
    then says where equilibrium came, not how fast the shot was), the
    preview's rate is averaged over the forecast's own valid part instead.
    """
    res = pv.result.summary["results"]
    if pv.valid and "equilibrium_from_time_us" in res and "loading_to_time_us" in res \
            and res.get("valid_fraction_of_loading", 1.0) >= 0.5:
        return pv.mean_rate, pv.final_strain, (res["equilibrium_from_time_us"] * 1e-6, res["loading_to_time_us"] * 1e-6)
    span = design.prediction.valid_span
    c = pv.result.curves
    inside = (c.time_us >= span[0] * 1e6) & (c.time_us <= span[1] * 1e6)
    return (float(c.strain_rate_per_s[inside].mean()) if inside.any() else pv.mean_rate), pv.final_strain, span


def plan_target(target: Target, plan: PlanFile, barset, *, preview=True, allow_bar_yield=False, out_dir=None,
                tables=None) -> PlannedShot:
    """Design one target and, with ``preview``, simulate and reduce it, adjusting until it lands.

    The adjustment, after a preview that misses by more than
    :data:`PREVIEW_TOLERANCE` in mean rate or final strain: a step of the
    1-D searches on striker speed and shaper thickness
    (:func:`shpb.plan.adjust_design`: the preview's values, the models'
    slopes), striker, specimen and shaper disc kept. A preview that is not
    valid (no force equilibrium) is redesigned with the next smaller
    specimen stock instead, when there is one; so is one whose equilibrium
    holds over less than half of the loading. At most
    ``plan.preview['previews']`` previews; the closest valid one is kept.
    """
    material = plan.materials[target.material]
    rig = Rig.from_barset(barset, plan.striker_diameter)
    tables = tables or {}
    constraints = dataclasses.replace(plan.constraints, strain_noise=strain_noise(barset, plan.preview))
    design = design_shot(target, material, rig, constraints, table=tables.get(material.name), shaper_tables=tables)
    where = f"{plan.source}: targets ({target.material} at {target.strain_rate:g} 1/s)"
    _check_safety(design, allow_bar_yield, where)
    if not preview:
        return PlannedShot(design, None)
    name = f"{target.material}-{target.strain_rate:g}"
    history, best, previous = [], None, None
    for k in range(plan.preview["previews"]):
        pv = preview_design(design, barset, plan.preview, name=name, allow_bar_yield=allow_bar_yield)
        errors = (_off(pv.mean_rate, target.strain_rate), _off(pv.final_strain, target.strain))
        s = design.spec
        entry = {"preview": k + 1, "striker_length_m": s.striker.length, "striker_speed_m_per_s": s.striker_speed,
                 "specimen_diameter_mm": s.specimen.diameter * 1e3,
                 "shaper_thickness_mm": None if s.shaper is None else s.shaper.length * 1e3,
                 "forecast_rate_per_s": design.prediction.mean_rate,
                 "forecast_strain": design.prediction.final_strain,
                 "rate_per_s": pv.mean_rate, "strain": pv.final_strain, "valid": pv.valid, "flags": list(pv.flags)}
        history.append(entry)
        miss = max(abs(errors[0]), abs(errors[1]))
        score = miss + (0.0 if pv.valid else 10.0)
        if best is None or score < best[0]:
            best = (score, design, pv)
        if (pv.valid and miss <= PREVIEW_TOLERANCE) or k + 1 == plan.preview["previews"] or pv.result is None:
            break
        smaller = tuple(d for d in constraints.specimen_diameters if d < s.specimen.diameter - 1e-9)
        fraction = pv.result.summary["results"].get("valid_fraction_of_loading", 1.0) if pv.result else 0.0
        if (not pv.valid or fraction < 0.5) and smaller:  # no (or too short a) force equilibrium
            constraints = dataclasses.replace(constraints, specimen_diameters=smaller)
            new = design_shot(target, material, rig, constraints, table=tables.get(material.name),
                              shaper_tables=tables)
            previous = None
            why = (f"preview not valid ({', '.join(pv.flags)})" if not pv.valid else
                   f"force equilibrium over only {100 * fraction:.0f} % of the loading")
        else:
            rate, strain, span = _reached(design, pv)
            new = adjust_design(design, rate, strain, rig, constraints, rate_span=span,
                                table=tables.get(material.name), shaper_tables=tables, previous=previous)
            previous = (s.striker_speed, None if s.shaper is None else s.shaper.length, rate)
            why = f"rate {100 * errors[0]:+.1f} %, strain {100 * errors[1]:+.1f} % off target"
        if new.spec == design.spec:
            entry["change"] = f"{why}: no adjustment found within the gun's range and the shaper stock"
            break
        _check_safety(new, allow_bar_yield, where)
        entry["change"] = f"{why}: {_change(design, new)}"
        design = new
    _, design, pv = best
    files = {}
    if out_dir is not None and pv.shot is not None:  # the kept preview's record, shot file and truth
        from .virtual import write_virtual_shot

        files = write_virtual_shot(pv.shot, out_dir, figure=False)
    pv = dataclasses.replace(pv, shot=None, files=files)  # the virtual shot itself is not kept
    return PlannedShot(design, pv, tuple(history))


def _change(old: ShotDesign, new: ShotDesign) -> str:
    """What an adjustment changed, in words."""
    a, b = old.spec, new.spec
    parts = []
    if abs(a.specimen.diameter - b.specimen.diameter) > 1e-9:
        parts.append(f"specimen {a.specimen.diameter * 1e3:g} x {a.specimen.length * 1e3:.2f} -> "
                     f"{b.specimen.diameter * 1e3:g} x {b.specimen.length * 1e3:.2f} mm")
    if a.striker.length != b.striker.length:
        parts.append(f"striker {a.striker.length * 1e3:g} -> {b.striker.length * 1e3:g} mm")
    parts.append(f"striker speed {a.striker_speed:.2f} -> {b.striker_speed:.2f} m/s")
    sa = "none" if a.shaper is None else f"{a.shaper.diameter * 1e3:g} x {a.shaper.length * 1e3:.2f} mm"
    sb = "none" if b.shaper is None else f"{b.shaper.diameter * 1e3:g} x {b.shaper.length * 1e3:.2f} mm"
    if sa != sb:
        parts.append(f"shaper {sa} -> {sb}")
    return "; ".join(parts)


# =========================================================================== the campaign
@dataclass(frozen=True, eq=False)
class CampaignPlan:
    """Every target of a plan file planned (:func:`plan_campaign`)."""

    plan: PlanFile
    barset: object
    shots: tuple  # of PlannedShot, in the plan's target order


def flow_tables(plan: PlanFile) -> dict:
    """Flow tables (:func:`shpb.plan.flow_table`) of every material (by material name) and shaper stock (by
    stock name) of a plan: built once, passed to :func:`plan_target`."""
    out = {m.name: flow_table(m.law) for m in plan.materials.values()}
    out.update({s.name: flow_table(s.law, max_strain=0.99) for s in plan.constraints.shapers})
    return out


def _plan_task(args):
    target, plan, barset, preview, allow, out_dir = args
    return plan_target(target, plan, barset, preview=preview, allow_bar_yield=allow, out_dir=out_dir,
                       tables=flow_tables(plan))


def plan_campaign(plan: PlanFile, barset, *, preview=True, allow_bar_yield=False, jobs=1, out_dir=None,
                  progress=None) -> CampaignPlan:
    """Plan every target of a plan file (in ``jobs`` processes), previews written to ``out_dir/previews`` if given.

    ``progress(done, total, planned_shot)`` is called after each target.
    Raises the first target's InputError (a bar that would yield) before
    any file is written.
    """
    previews = None if out_dir is None else Path(out_dir) / PREVIEW_DIR
    tasks = [(t, plan, barset, preview, allow_bar_yield, previews) for t in plan.targets]
    done = []
    if jobs <= 1 or len(tasks) <= 1:
        tables = flow_tables(plan)
        for i, task in enumerate(tasks):
            t, _, _, pv, allow, outd = task
            done.append(plan_target(t, plan, barset, preview=pv, allow_bar_yield=allow, out_dir=outd, tables=tables))
            if progress:
                progress(i + 1, len(tasks), done[-1])
    else:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(max_workers=min(jobs, len(tasks))) as ex:
            for i, shot in enumerate(ex.map(_plan_task, tasks)):
                done.append(shot)
                if progress:
                    progress(i + 1, len(tasks), shot)
    return CampaignPlan(plan, barset, tuple(done))


def _shot_ids(planned: PlannedShot, repeats: int):
    return [f"{planned.name}-{chr(ord('a') + k)}" for k in range(repeats)]


#: Free tag columns of the shots skeleton (units in the names; setup columns come from shpb.schema).
TAG_COLUMNS = ("target_rate_per_s", "target_strain", "striker_length_m", "striker_speed_m_per_s",
               "striker_energy_J", "shaper", "shaper_diameter_mm", "shaper_thickness_mm", "sample_rate_MHz",
               "record_length_us", "pre_trigger_us", "bar_stress_percent_of_yield", "forecast_rate_per_s",
               "forecast_strain", "preview_rate_per_s", "preview_strain", "preview_valid")


def shots_table_text(campaign: CampaignPlan) -> str:
    """The ``shots.csv`` skeleton: one row per planned shot (targets x repeats), ready for ``shpb batch``.

    Setup columns (``record``, ``specimen_length [mm]``, ... ) are those of
    :mod:`shpb.schema`; the planned settings follow as free tag columns
    (:data:`TAG_COLUMNS`). The ``record`` column names where each shot's
    record is expected (``raw/<id>.csv``): put the record there after the
    shot, or edit the cell.
    """
    import csv
    import io

    from .schema import find_key

    setup = [("length", "mm"), ("diameter", "mm"), ("material", None), ("temperature", "K"), ("modulus", "GPa"),
             ("density", "kg/m^3")]  # the specimen keys, under their campaign column names (shpb.schema)
    names = [find_key("specimen", key).column_name for key, _ in setup]
    header = ["id", "record"] + [f"{n} [{u}]" if u else n for n, (_, u) in zip(names, setup)] + list(TAG_COLUMNS)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    for planned in campaign.shots:
        d, pv = planned.design, planned.preview
        s, m = d.spec, d.material
        cells = [f"{s.specimen.length * 1e3:.2f}", f"{s.specimen.diameter * 1e3:.2f}", m.name,
                 "" if d.target.temperature is None else f"{d.target.temperature:.2f}", f"{m.modulus / 1e9:g}",
                 f"{m.density:g}", f"{d.target.strain_rate:g}", f"{d.target.strain:g}", f"{s.striker.length:g}",
                 f"{s.striker_speed:.2f}", f"{d.safety['striker_kinetic_energy_J']:.1f}", d.shaper_stock or "none",
                 "" if s.shaper is None else f"{s.shaper.diameter * 1e3:g}",
                 "" if s.shaper is None else f"{s.shaper.length * 1e3:.2f}", f"{s.sample_rate / 1e6:g}",
                 f"{d.record['record_length_s'] * 1e6:.0f}", f"{d.record['pre_trigger_s'] * 1e6:.0f}",
                 "" if d.safety["peak_fraction_of_yield"] is None else f"{100 * d.safety['peak_fraction_of_yield']:.0f}",
                 f"{d.prediction.mean_rate:.0f}", f"{d.prediction.final_strain:.3f}",
                 "" if pv is None else f"{pv.mean_rate:.0f}", "" if pv is None else f"{pv.final_strain:.3f}",
                 "" if pv is None else str(pv.valid).lower()]
        for sid in _shot_ids(planned, campaign.plan.repeats):
            w.writerow([sid, f"{RECORD_DIR}/{sid}.csv"] + cells)
    return buf.getvalue()


def campaign_toml_text(campaign: CampaignPlan, out_dir) -> str:
    """The ``campaign.toml`` skeleton beside ``shots.csv`` (bar set by a path relative to ``out_dir``)."""
    from .virtual import RECORD_COLUMNS

    source = campaign.barset.source or "barset.toml"
    rel = Path(os.path.relpath(Path(source).resolve(), Path(out_dir).resolve())).as_posix()
    time_col, ch1, ch2 = RECORD_COLUMNS
    name = campaign.plan.name.replace('"', "'")
    tags = ", ".join(f'"{t}"' for t in TAG_COLUMNS)
    return (f"# Campaign skeleton written by `shpb plan` from {Path(campaign.plan.source).name}.\n"
            f"# Put each shot's record where its `record` cell says ({RECORD_DIR}/<id>.csv), check the channel\n"
            f"# columns below against your recorder's export, then:  shpb batch campaign.toml\n"
            f"# The planned settings are the tag columns of shots.csv.\n# {SAFETY}\n"
            f'name = "{name}"\nshots = "shots.csv"\nbarset = "{rel}"\ntags = [{tags}]\n\n'
            f'[record]\nincident = "{ch1}"\ntransmitted = "{ch2}"\ntime = "{time_col}"\n\n'
            f"[analysis]\ndispersion = true\n")


def plan_summary(campaign: CampaignPlan) -> dict:
    """Everything the plan says, as plain values (``plan.json``): designs, reasons, safety, record, previews."""
    from .io import to_plain

    shots = []
    for planned in campaign.shots:
        d, pv = planned.design, planned.preview
        s, p = d.spec, d.prediction
        shots.append({
            "name": planned.name, "material": d.material.name, "target_strain_rate_per_s": d.target.strain_rate,
            "target_strain": d.target.strain, "temperature_K": d.target.temperature,
            "striker": {"length_m": s.striker.length, "speed_m_per_s": s.striker_speed,
                        "diameter_m": s.striker.diameter},
            "specimen": {"length_m": s.specimen.length, "diameter_m": s.specimen.diameter, **d.specimen},
            "shaper": None if s.shaper is None else {"material": d.shaper_stock, "diameter_m": s.shaper.diameter,
                                                     "thickness_m": s.shaper.length,
                                                     "final_strain": p.shaper_strain},
            "reasons": d.reasons,
            "forecast": {"mean_strain_rate_per_s": p.mean_rate, "strain_rate_cv": p.rate_cv,
                         "final_strain": p.final_strain, "rise_time_us": p.timing["rise_time_s"] * 1e6,
                         "pulse_duration_us": p.timing["duration_s"] * 1e6,
                         "peak_incident_strain": p.timing["peak"],
                         "uncertainty": d.material.uncertainty,
                         "band": {k: {"mean_strain_rate_per_s": r, "final_strain": e} for k, (r, e) in d.band.items()}},
            "safety": d.safety,
            "record": d.record,
            "dispersion": d.dispersion,
            "notes": list(d.notes),
            "preview": None if pv is None else {
                "valid": pv.valid, "mean_strain_rate_per_s": pv.mean_rate, "max_strain": pv.final_strain,
                "flags": list(pv.flags), "files": {k: str(v) for k, v in pv.files.items()}},
            "adjustments": list(planned.history),
        })
    return to_plain({"plan": campaign.plan.name, "source": campaign.plan.source,
                     "barset": campaign.barset.source, "repeats": campaign.plan.repeats, "shots": shots,
                     "caution": SAFETY}, nonfinite="null")


def write_plan(campaign: CampaignPlan, out_dir, *, figure=True) -> dict:
    """Write ``plan.json``, ``shots.csv``, ``campaign.toml`` and (``figure``) ``plan.png`` into ``out_dir``, atomically.

    Returns the written paths by kind (the previews, written while planning,
    are in ``out_dir/previews``).
    """
    from .io import atomic_savefig, atomic_write_json, atomic_write_text

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    paths = {k: out / v for k, v in PLAN_FILES.items()}
    atomic_write_text(paths["shots"], shots_table_text(campaign))
    atomic_write_text(paths["campaign"], campaign_toml_text(campaign, out))
    written = {"shots": paths["shots"], "campaign": paths["campaign"]}
    if figure:
        atomic_savefig(plot_plan(campaign), paths["figure"], dpi=90)
        written["figure"] = paths["figure"]
    atomic_write_json(paths["plan"], plan_summary(campaign))
    written["plan"] = paths["plan"]
    return written


# =========================================================================== report and figure
def report_lines(planned: PlannedShot) -> list:
    """The plan of one target in a few lines: settings, reasons, forecast, preview, record, safety."""
    d, pv = planned.design, planned.preview
    s, p, sf = d.spec, d.prediction, d.safety
    t = d.target
    lines = [f"{planned.name}: {d.material.name} at {t.strain_rate:g} 1/s to a strain of {t.strain:g}",
             f"  specimen  {s.specimen.diameter * 1e3:.2f} mm diameter x {s.specimen.length * 1e3:.2f} mm "
             f"(L/D {d.specimen['length_over_diameter']:.2f}); lubricate both faces",
             f"  striker   {s.striker.length * 1e3:g} mm at {s.striker_speed:.2f} m/s "
             f"(kinetic energy {sf['striker_kinetic_energy_J']:.1f} J)",
             f"  shaper    {d.reasons['shaper']}",
             f"  forecast  mean rate {p.mean_rate:.0f} 1/s (cv {p.rate_cv:.2f}), strain {p.final_strain:.3f}, "
             f"equilibrium over {100 * p.valid_fraction:.0f} % of the loading; flow stress "
             f"+/-{100 * d.material.uncertainty:.0f} %: rate {d.band['rate_range'][0]:.0f}-"
             f"{d.band['rate_range'][1]:.0f} 1/s, strain {d.band['strain_range'][0]:.3f}-"
             f"{d.band['strain_range'][1]:.3f}"]
    if pv is not None:
        verdict = "VALID" if pv.valid else "NOT VALID"
        lines.append(f"  preview   {verdict}: mean rate {pv.mean_rate:.0f} 1/s ({100 * _off(pv.mean_rate, t.strain_rate):+.1f} %), "
                     f"strain {pv.final_strain:.3f} ({100 * _off(pv.final_strain, t.strain):+.1f} %)"
                     + (f"; flags: {', '.join(pv.flags)}" if pv.flags else ""))
        for h in planned.history:
            if "change" in h:
                lines.append(f"  adjusted  after preview {h['preview']}: {h['change']}")
    r, w = d.record, d.record["window"]
    lines.append(f"  record    {r['sample_rate_Hz'] / 1e6:g} MHz ({r['reason']}), {r['record_length_s'] * 1e6:.0f} us "
                 f"with {r['pre_trigger_s'] * 1e6:.0f} us pre-trigger; pulse {r['pulse_duration_s'] * 1e6:.0f} us "
                 f"{'fits' if w['fits'] else 'does NOT fit'} between the gauges "
                 f"(overlap limit {w['overlap_limit_s'] * 1e6:.0f} us, window {w['window_length_s'] * 1e6:.0f} us)")
    ds = d.dispersion
    lines.append(f"  dispersion {ds['severity']}: rise {p.timing['rise_time_s'] * 1e6:.1f} us, a/wavelength "
                 f"{ds['a_over_wavelength']:.3f} at {ds['frequency_Hz'] / 1e3:.0f} kHz")
    if sf["yield_strength_MPa"] is None:
        lines.append("  safety    no yield strength in the bar set: the bar stress cannot be checked")
    else:
        lines.append(f"  safety    bar stress {sf['incident_bar_stress_MPa']:.0f} MPa from the impact without shaper, "
                     f"{sf['forecast_peak_bar_stress_MPa']:.0f} MPa forecast with it (dispersion ripples included): "
                     f"at most {100 * sf['peak_fraction_of_yield']:.0f} % of the yield strength "
                     f"{sf['yield_strength_MPa']:.0f} MPa (limit {100 * sf['bar_stress_limit']:.0f} %)")
    for note in d.notes:
        lines.append(f"  NOTE      {note}")
    return lines


def plot_plan(campaign: CampaignPlan):
    """The planning sheet: per target, its settings, stress-strain, strain-rate history and R(t).

    Forecasts of the planning models are dashed; previews (virtual shots
    reduced as real ones) solid, their valid part bold. Returns a
    ``matplotlib.figure.Figure`` built without pyplot.
    """
    from matplotlib.figure import Figure

    from .validity import EQUILIBRIUM_THRESHOLD

    shots = campaign.shots
    n = len(shots)
    fig = Figure(figsize=(15, 1.0 + 2.7 * n), constrained_layout=True)
    axes = fig.subplots(n, 4, squeeze=False, gridspec_kw={"width_ratios": [1.35, 1, 1, 1]})
    for row, planned in enumerate(shots):
        d, pv = planned.design, planned.preview
        s, p, t = d.spec, d.prediction, d.target
        ax_text, ax_ss, ax_rate, ax_r = axes[row]
        ax_text.axis("off")
        sf = d.safety
        text = [f"{planned.name}", f"target {t.strain_rate:g} 1/s, strain {t.strain:g}",
                f"specimen {s.specimen.diameter * 1e3:.2f} x {s.specimen.length * 1e3:.2f} mm",
                f"striker {s.striker.length * 1e3:g} mm at {s.striker_speed:.2f} m/s "
                f"({sf['striker_kinetic_energy_J']:.0f} J)",
                "no shaper" if s.shaper is None else
                f"shaper {d.shaper_stock} {s.shaper.diameter * 1e3:g} x {s.shaper.length * 1e3:.2f} mm",
                f"record {s.sample_rate / 1e6:g} MHz, {d.record['record_length_s'] * 1e6:.0f} us",
                "bar stress: no yield strength given" if sf["fraction_of_yield"] is None else
                f"bar stress at most {100 * sf['peak_fraction_of_yield']:.0f} % of yield"]
        if pv is not None:
            text.append(f"preview {'VALID' if pv.valid else 'NOT VALID'}: {pv.mean_rate:.0f} 1/s, "
                        f"strain {pv.final_strain:.3f}")
        ax_text.text(0.0, 1.0, "\n".join(text), va="top", ha="left", fontsize=8.5, family="monospace",
                     transform=ax_text.transAxes)
        upto = int(np.argmax(p.strain)) + 1  # the forecast up to its peak strain
        ax_ss.plot(p.strain[:upto], p.stress[:upto] / 1e6, "k--", lw=1, label="forecast")
        ax_rate.plot(p.time * 1e6, p.strain_rate, "k--", lw=1, label="forecast")
        if pv is not None and pv.result is not None:
            c = pv.result.curves
            valid = c.valid.to_numpy() == 1
            ax_ss.plot(c.strain, c.stress_MPa, color="C0", lw=0.8, label="preview")
            ax_ss.plot(c.strain[valid], c.stress_MPa[valid], color="C0", lw=2.0, label="preview, valid part")
            ax_rate.plot(c.time_us, c.strain_rate_per_s, color="C0", lw=0.8, label="preview")
            ax_r.plot(c.time_us, c.equilibrium_R, color="C0", lw=0.8, label="preview R(t)")
            ax_r.plot(c.time_us[valid], c.equilibrium_R[valid], color="C0", lw=2.0, label="valid part")
            ax_rate.set_xlim(-10, float(c.time_us.iloc[-1]) if len(c) else None)
            ax_r.set_xlim(ax_rate.get_xlim())
        if p.equilibrium_ratio is not None:
            ax_r.plot(p.time * 1e6, p.equilibrium_ratio, "k--", lw=1, label="forecast R(t)")
        ax_rate.axhspan(0.9 * t.strain_rate, 1.1 * t.strain_rate, color="C2", alpha=0.15, label="target +/-10 %")
        ax_r.axhspan(-EQUILIBRIUM_THRESHOLD, EQUILIBRIUM_THRESHOLD, color="C2", alpha=0.15,
                     label=f"|R| <= {EQUILIBRIUM_THRESHOLD:g}")
        ax_r.set_ylim(-0.5, 0.5)
        ax_ss.set(xlabel="engineering strain [1]", ylabel="engineering stress [MPa]")
        ax_rate.set(xlabel="time at the specimen [µs]", ylabel="strain rate [1/s]")
        ax_r.set(xlabel="time at the specimen [µs]", ylabel="R(t) [1]")
        for ax in (ax_ss, ax_rate, ax_r):
            ax.legend(fontsize=6.5, loc="best")
    fig.suptitle(f"Test plan {campaign.plan.name}: forecast (dashed) and virtual-shot preview reduced as a real "
                 f"shot (solid). A forecast, not a clearance to fire.", fontsize=10)
    return fig
