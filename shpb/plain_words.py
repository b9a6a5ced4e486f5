"""What a shot's verdict and flags mean, in words a technician at the gun understands.

One table, :data:`PLAIN_WORDS`, keyed by flag code: what the finding means
for the user (a template that may quote the shot's results, e.g.
``{strain_rate_cv:.0%}``) and what to check on the rig before the next shot.
A code the table does not know is said through :data:`GENERIC` (the flag's
own message), so a new flag needs no change here to be shown, and one line
here to be shown well.

The console lines of a shot (``shpb reduce``, ``shpb watch``) and the flag
texts of the HTML report are made here, so they say the same thing. Standard
library only; numbers read from a curves table (the rate range) need numpy,
imported when asked.
"""

from __future__ import annotations

import math
import string
from dataclasses import dataclass
from typing import Mapping, Optional


@dataclass(frozen=True)
class Plain:
    """What a flag means and what to check.

    Attributes
    ----------
    says : str
        The meaning in plain words; may quote facts of the shot as format
        fields (``{mean_strain_rate_per_s:.0f}``). When a fact is missing,
        the flag's own message is said instead.
    check : str
        What to check or change on the rig (empty when nothing).
    """

    says: str
    check: str = ""


#: Flag code -> plain words. Facts a template may quote: the summary's ``results`` (units in the keys) and
#: the derived values of :func:`shot_facts` (``rate_low_per_s``, ``rate_high_per_s``).
PLAIN_WORDS: dict = {
    # the curve
    "rate_not_constant": Plain(
        "the strain rate drifts by {strain_rate_cv:.0%} over the test: report the rate as a range "
        "(about {rate_low_per_s:.0f} to {rate_high_per_s:.0f} 1/s), not as one number",
        "for a steadier rate next time: a pulse shaper matched to this material"),
    "no_equilibrium": Plain(
        "the forces on the specimen's two faces never agree: the stress is not the specimen's and the "
        "curve must not be used",
        "a pulse shaper to slow the incident rise; a shorter specimen (length about half the diameter); "
        "flat, parallel, lubricated specimen faces centred on the bars"),
    "short_equilibrium": Plain(
        "the forces on the two faces agree over only {valid_fraction_of_loading:.0%} of the loading: only "
        "the end of the curve can be used",
        "a pulse shaper to slow the incident rise; a shorter specimen"),
    "equilibrium_too_soon": Plain(
        "the forces balance sooner than a stress wave can cross the specimen: the specimen's length, "
        "modulus or density in the setup is probably wrong",
        "the specimen length and material in the shots table"),
    "equilibrium_noisy": Plain(
        "the records are too noisy to show that the forces balance: equilibrium is not disproved, "
        "only not shown",
        "cable shielding and grounding, the amplifier's noise, a low-pass filter setting"),
    "no_loading": Plain(
        "no loading of the specimen was found in the record",
        "the gauge polarities in the bar set, the channel assignment (incident/transmitted), that the "
        "striker hit the bar"),
    "yield_before_equilibrium": Plain(
        "the yield point comes before the forces balance: the yield stress and modulus of this shot are "
        "not reliable; quote the flow stress at a larger strain",
        "a pulse shaper for a slower rise gives equilibrium before yield"),
    "no_yield_point": Plain("no yield point was found by the offset method (no clear elastic line)"),
    "modulus_too_high": Plain(
        "the curve's elastic slope is far steeper than the specimen's modulus: the strain is too small",
        "the specimen length in the shots table, the gauge distances and the bars' wave speeds"),
    # the record
    "no_transmitted_pulse": Plain(
        "no pulse reached the transmitted bar's gauge",
        "the transmitted gauge's cable, bridge supply and amplifier; the channel assignment; that the "
        "specimen sat between the bars, touching both"),
    "transmitted_polarity": Plain(
        "the transmitted pulse has the wrong sign",
        "the polarity of the transmitted gauge in the bar set, or swapped bridge leads"),
    "record_truncated": Plain(
        "the record stops before the pulses have passed the gauges",
        "a longer record (the scope's time base or memory depth) or more pre-trigger"),
    "waves_overlap": Plain(
        "the incident and reflected waves overlap at the incident gauge, so they cannot be told apart",
        "a shorter striker, or the incident gauge further from the specimen, or a second gauge station on each "
        "bar so the waves can be separated (docs/separation.md)"),
    "waves_separated": Plain(
        "the pulse was longer than the time between the incident and reflected waves at the gauge; the waves "
        "were told apart from two gauge stations per bar"),
    "transmitted_overlap": Plain(
        "the echo from the transmitted bar's far end returns to its gauge before the pulse has passed: "
        "the end of the curve may be disturbed",
        "a shorter striker, or the transmitted gauge closer to the specimen"),
    "clipped": Plain(
        "a channel hit the recorder's range: the top of the pulse is cut off",
        "the scope's range (volts per division) or the amplifier gain of that channel"),
    "flat_top": Plain(
        "a pulse sits flat, within the noise, below the recorder's range: an amplifier or bridge "
        "conditioner probably saturated",
        "the amplifier gain and the conditioner's range"),
    "glitches_repaired": Plain("single-sample spikes on a channel were repaired",
                               "the cable, its shield and connectors if there were many"),
    "foot_gap": Plain(
        "a spike may have been taken for the start of the incident pulse: the time origin may be wrong",
        "pickup on the incident channel; set incident_start by hand if needed"),
    "window_short": Plain("the analysis window given by hand ends before the pulse does: the curve stops "
                          "early"),
    "waves_misaligned": Plain(
        "the waves at the specimen faces are out of step",
        "the gauge distances and the bars' wave speeds in the bar set"),
    "reflected_early": Plain(
        "the reflected wave seems to come before the wave it reflects",
        "the incident gauge distance and the incident bar's wave speed in the bar set"),
    "force_mismatch": Plain(
        "the forces on the two faces differ by a constant factor: a scale error",
        "each gauge's gain, bridge, gauge factor and excitation; the bars' moduli and diameters"),
    "striker_mismatch": Plain(
        "the incident pulse does not match the striker's speed",
        "the incident gauge's gain, bridge, gauge factor and excitation, the striker speed reading, the "
        "pulse shaper"),
    "modulus_speed_mismatch": Plain(
        "a bar's modulus, density and measured wave speed disagree",
        "the bar set's modulus, density and calibrated wave speed"),
    "dispersion_off": Plain("the dispersion correction was off for this shot"),
    # the specimen
    "inertia_large": Plain(
        "the specimen's own inertia changes the measured stress by up to {inertia_gorham_max_fraction:.0%}: "
        "the curve is biased by it (the corrected stress is beside it in the curves, not applied)",
        "a smaller specimen, or a pulse shaped for a constant strain rate"),
    "friction_band": Plain(
        "with friction coefficient {friction_coefficient:g} at the bar faces, the flow stress without "
        "friction lies in a band below the measured one (in the summary, not applied)"),
    # the bars
    "bar_yielded": Plain(
        "a bar was loaded to its yield strength: the data are invalid and the bar may be damaged",
        "STOP: inspect the bar ends (flat, no dents) and the bar's straightness before the next shot; "
        "lower the striker speed"),
    "bar_stress_high": Plain(
        "a bar came within 10 % of its yield strength",
        "lower the striker speed (or use a shorter or lighter striker) for the next shot"),
    "bar_yield_unknown": Plain("the bar set gives no yield strength, so the bars' stress was not checked",
                               "add yield_strength to the bar material in the bar set"),
}

#: How a code missing from :data:`PLAIN_WORDS` is said: the flag's own message.
GENERIC = Plain("{message}", "")

#: Words for a flag's severity, as a line begins.
SEVERITY_WORDS = {"error": "NOT VALID", "warning": "warning", "info": "note"}


def explain(code: str, message: str = "", facts: Optional[Mapping] = None) -> Plain:
    """The plain words of one flag, with the shot's facts filled in.

    Parameters
    ----------
    code : str
        The flag's code.
    message : str
        The flag's own message (said when the code is unknown or a fact the
        template quotes is missing).
    facts : mapping, optional
        Results of the shot (:func:`shot_facts`).

    Returns
    -------
    Plain
        ``says`` filled in; ``check`` as in the table.
    """
    entry = PLAIN_WORDS.get(code, GENERIC)
    values = dict(facts or {})
    values["message"] = message
    try:
        says = string.Formatter().vformat(entry.says, (), _Strict(values))
    except (KeyError, ValueError, TypeError, IndexError):
        says = message or entry.says
    return Plain(says, entry.check)


class _Strict(dict):
    """A fact that is missing or not a finite number (where a number is formatted) is a KeyError."""

    def __getitem__(self, key):
        value = super().__getitem__(key)
        if value is None or (isinstance(value, float) and not math.isfinite(value)):
            raise KeyError(key)
        return value


def shot_facts(summary: Mapping, curves=None) -> dict:
    """The facts plain words may quote: the summary's results, and the rate range when the curves are given.

    Parameters
    ----------
    summary : mapping
        A shot's summary (``summary.json``).
    curves : pandas.DataFrame, optional
        The shot's curves (``strain_rate_per_s``, ``valid``); gives
        ``rate_low_per_s`` and ``rate_high_per_s``, the 5th and 95th
        percentiles of the strain rate over the valid part [1/s].
    """
    facts = dict(summary.get("results") or {})
    if curves is not None and "strain_rate_per_s" in curves and "valid" in curves:
        import numpy as np

        valid = curves["valid"].to_numpy().astype(bool)
        rate = curves["strain_rate_per_s"].to_numpy(dtype=float)[valid]
        rate = rate[np.isfinite(rate)]
        if rate.size:
            low, high = np.percentile(rate, [5, 95])
            facts["rate_low_per_s"], facts["rate_high_per_s"] = _about(low), _about(high)
    return facts


def _about(value: float) -> float:
    """A number rounded to two significant digits (a range quoted "about")."""
    if value == 0 or not math.isfinite(value):
        return float(value)
    return float(round(value, 1 - int(math.floor(math.log10(abs(value))))))


def _num(facts: Mapping, key: str, fmt: str) -> Optional[str]:
    v = facts.get(key)
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        return None
    return format(v, fmt)


def with_u(facts: Mapping, key: str, fmt: str) -> Optional[str]:
    """A result as text, with ``± U`` (its expanded uncertainty ``U95_<key>``, k = 2) when the uncertainty
    stage gave one; None when the result is missing."""
    from .uncertainty import expanded_name

    value = _num(facts, key, fmt)
    big_u = _num(facts, expanded_name(key), fmt)
    return f"{value} ± {big_u}" if value is not None and big_u is not None else value


def key_facts(facts: Mapping, flow: Optional[tuple] = None) -> str:
    """The one or two numbers that matter for a valid shot: its strain rate and its stress.

    Parameters
    ----------
    facts : mapping
        :func:`shot_facts`.
    flow : (float, float), optional
        ``(strain [1], flow stress [MPa])`` to quote instead of the yield
        stress (a campaign's comparison strain).
    """
    parts = []
    rate = with_u(facts, "mean_strain_rate_per_s", ".0f")
    if rate:
        parts.append(f"{rate} 1/s")
    if flow is not None and flow[1] is not None and math.isfinite(flow[1]):
        parts.append(f"{flow[1]:.0f} MPa at strain {flow[0]:g}")
    elif _num(facts, "yield_stress_MPa", ".0f"):
        parts.append(f"yield {with_u(facts, 'yield_stress_MPa', '.0f')} MPa")
    reached = _num(facts, "max_strain", ".2f")
    if reached:
        parts.append(f"strain reached {reached}")
    return ", ".join(parts)


def verdict_line(name: str, summary: Mapping, facts: Optional[Mapping] = None, flow: Optional[tuple] = None) -> str:
    """One line: the verdict and what matters (for a shot that is not valid, the first reason).

    ``shot HR-A61-2500-a: VALID  2445 1/s, yield 376 MPa, strain reached 0.25``
    """
    facts = shot_facts(summary) if facts is None else facts
    flags = summary.get("flags") or []
    errors = [f for f in flags if f.get("severity") == "error"]
    if not errors and summary.get("valid", True):
        return f"shot {name}: VALID  {key_facts(facts, flow)}".rstrip()
    first = errors[0] if errors else {"code": "", "message": "not valid"}
    reason = explain(first.get("code", ""), first.get("message", ""), facts).says
    more = f" (+{len(errors) - 1} more reason{'s' if len(errors) > 2 else ''})" if len(errors) > 1 else ""
    return f"shot {name}: NOT VALID: {reason}{more}"


def flag_lines(summary: Mapping, facts: Optional[Mapping] = None, indent: str = "  ", said: int = 0) -> list:
    """Each flag in plain words (errors first, then warnings, then notes), with what to check for errors and
    warnings, and for errors the flag's own message (the numbers behind it) as ``detail``.

    ``said`` errors at the head of the list were already said (by the verdict line): only what to check is
    given for them.
    """
    facts = shot_facts(summary) if facts is None else facts
    order = {"error": 0, "warning": 1, "info": 2}
    lines = []
    for k, f in enumerate(sorted(summary.get("flags") or [], key=lambda f: order.get(f.get("severity"), 3))):
        sev = f.get("severity", "")
        plain = explain(f.get("code", ""), f.get("message", ""), facts)
        word = {"error": "why", "warning": "warning", "info": "note"}.get(sev, sev)
        if k >= said:
            lines.append(f"{indent}{word}: {plain.says}")
        if sev == "error" and f.get("message") and f.get("message") != plain.says:
            lines.append(f"{indent}  detail: {f['message']}")  # the numbers behind the verdict
        if plain.check and sev in ("error", "warning"):
            lines.append(f"{indent}  check: {plain.check}")
    return lines


def shot_lines(name: str, summary: Mapping, curves=None, flow: Optional[tuple] = None) -> list:
    """What the console says about a reduced shot: the verdict line and each flag in plain words."""
    facts = shot_facts(summary, curves)
    first = verdict_line(name, summary, facts, flow)
    said = 1 if any(f.get("severity") == "error" for f in summary.get("flags") or []) else 0
    inertia = _num(facts, "inertia_gorham_max_fraction", ".1%")  # with the specimen's density
    extra = [f"  inertia: the specimen's own inertia changes the stress by at most {inertia} (Davies & Hunter "
             f"{_num(facts, 'inertia_dh_max_fraction', '.1%')}; beside it, not applied)"] if inertia else []
    return [first] + extra + flag_lines(summary, facts, said=said)


def uncertainty_lines(summary: Mapping) -> list:
    """What the console says of the uncertainty stage (none when it did not run): the results with ± U,
    what ± means and the inputs that dominate. Said after the verdict (:func:`shot_lines`), which is announced
    before the stage runs."""
    from .reduce import ShotResult

    unc = summary.get("uncertainty") or {}
    if not unc:
        return []
    facts = shot_facts(summary)
    dom = (unc.get("dominant_inputs") or {}).get("flow_stress_mean_MPa") or []
    numbers = [f"{v} {unit}" for v, unit in ((with_u(facts, "mean_strain_rate_per_s", ".0f"), "1/s"),
                                             (with_u(facts, "yield_stress_MPa", ".0f"), "MPa yield"),
                                             (with_u(facts, "flow_stress_mean_MPa", ".0f"), "MPa mean flow stress"))
               if v and "±" in v]
    lines = [f"  uncertainty: {', '.join(numbers) or 'n/a'} (± U = 2 u, about 95 %); largest contributions: "
             f"{', '.join(dom[:2]) or 'n/a'} ({ShotResult.BUDGET_FILE})"]
    return lines + [f"  uncertainty: {note}" for note in unc.get("notes") or ()]
