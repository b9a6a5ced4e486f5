"""Test planning at the file edge (shpb.planning, shpb plan): the plan file, the campaign skeleton, the safety
refusal, and end to end on virtual shots: the preview of each plan, a virtual shot reduced as a real shot is,
reaches its target.

The end-to-end targets (two fictional alloys, three rates) use a short rig (1.0 m / 0.8 m bars) so the records
stay short; each target costs 2-6 s of CPU (its design, one or two virtual shots and their reductions), the
six about 20-25 s, spread over the xdist workers (one of them also reduces the campaign skeleton in batch). The checks' outside references: the targets themselves (the
issue's acceptance: mean rate and final strain within 10 %, a valid verdict) and the reduction's own verdict
(Ravichandran & Subhash 1994 equilibrium, as shpb.validity applies it).
"""

import json
import shutil
from pathlib import Path

import pytest
from matplotlib.figure import Figure

from shpb.campaign import load_campaign
from shpb.cli import main
from shpb.errors import InputError
from shpb.plan import davies_hunter_ratio
from shpb.planning import (TARGET_TOLERANCE, CampaignPlan, load_plan, plan_campaign, plot_plan, with_targets,
                           write_plan)
from shpb.setup import load_barset

REPO = Path(__file__).resolve().parents[1]
EXAMPLE_BARS = REPO / "configs" / "example_bars.toml"
EXAMPLE_PLAN = REPO / "configs" / "example_plan.toml"

RIG = """name = "short test rig (maraging-type steel, 19.05 mm)"
[bar_material]
name = "maraging-type steel"
modulus = "190 GPa"
density = "8000 kg/m^3"
poisson_ratio = 0.30
yield_strength = "{yield_strength}"
[incident]
diameter = "19.05 mm"
length = "1.0 m"
[incident.gauge]
distance = "500 mm"
bridge = "half-bending"
gauge_factor = 2.1
excitation = "10 V"
gain = 100
full_scale = "5 V"
[transmitted]
diameter = "19.05 mm"
length = "0.8 m"
[transmitted.gauge]
distance = "300 mm"
bridge = "half-bending"
gauge_factor = 2.1
excitation = "10 V"
gain = 100
polarity = -1
full_scale = "5 V"
[striker]
length = "0.2 m"
diameter = "19.05 mm"
"""


def short_plan(text: str) -> str:
    """The example plan for the short rig: strains its strikers reach, pulses that fit its 205 us window,
    two previews at most."""
    return (text.replace("strain = [0.15, 0.2, 0.3]", "strain = [0.1, 0.2, 0.3]")
            .replace('"0.35 m", "0.4 m"]', '"0.35 m"]').replace("previews = 3", "previews = 2"))


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("planning")
    (folder / "bars.toml").write_text(RIG.format(yield_strength="1900 MPa"))
    (folder / "weak_bars.toml").write_text(RIG.format(yield_strength="250 MPa"))
    text = short_plan(EXAMPLE_PLAN.read_text())
    assert "strain = [0.1, 0.2, 0.3]" in text and "previews = 2" in text
    (folder / "plan.toml").write_text(text)
    return folder


# --------------------------------------------------------------------------- the plan file
def test_example_plan_file_reads():
    plan = load_plan(EXAMPLE_PLAN)
    assert [(t.material, t.strain_rate, t.strain) for t in plan.targets] == [
        (m, r, e) for m in ("HR-A61", "HR-C10") for r, e in ((1000.0, 0.15), (2500.0, 0.2), (5000.0, 0.3))]
    a61 = plan.materials["HR-A61"]
    assert (a61.modulus, a61.density, a61.poisson_ratio, a61.uncertainty) == (70e9, 2800.0, 0.33, 0.15)
    c = plan.constraints
    assert c.speed_range == (3.0, 40.0) and c.strikers[0] == pytest.approx(0.1) and c.bar_stress_limit == 0.8
    (cu,) = c.shapers
    assert cu.thickness_range == pytest.approx((0.4e-3, 1.5e-3)) and len(cu.diameters) == 3
    assert plan.repeats == 2 and plan.preview["previews"] == 3


@pytest.mark.parametrize("change, where", [
    (("[targets]", "[targets]\nspeed = 3"), "targets"),                            # unknown key
    (("poisson_ratio = 0.33\n", ""), "HR-A61"),                                      # missing key
    (('law = "johnson-cook"\nstress_measure = "true"\nA = "60 MPa"', 'law = "elastic"\nA2 = "60 MPa"'), "shapers"),
    (("strain = [0.15, 0.2, 0.3]", "strain = [0.15, 0.2]"), "strain"),              # one strain per rate
    (('speed_range = ["3 m/s", "40 m/s"]', 'speed_range = ["40 m/s", "3 m/s"]'), "speed_range"),
])
def test_plan_file_errors_name_the_file_and_the_key(tmp_path, change, where):
    path = tmp_path / "bad.toml"
    text = EXAMPLE_PLAN.read_text()
    assert change[0] in text
    path.write_text(text.replace(change[0], change[1], 1))
    with pytest.raises(InputError) as err:
        load_plan(path)
    assert str(path) in str(err.value) and where in str(err.value)


def test_with_targets_replaces_rates_strain_and_materials():
    plan = with_targets(load_plan(EXAMPLE_PLAN), rates=[1500.0], strain=0.12, materials=["HR-C10"], repeats=3)
    assert [(t.material, t.strain_rate, t.strain) for t in plan.targets] == [("HR-C10", 1500.0, 0.12)]
    assert plan.repeats == 3
    with pytest.raises(InputError, match="--material"):
        with_targets(plan, materials=["HR-X"])


# --------------------------------------------------------------------------- the command, without previews
def test_plan_command_writes_a_campaign_skeleton_ready_for_batch(files, tmp_path, capsys):
    out = tmp_path / "plan"
    code = main(["plan", str(files / "bars.toml"), str(files / "plan.toml"), "--no-preview", "--no-figure",
                 "--material", "HR-A61", "--rate", "2500 1/s", "--strain", "0.2", "--out", str(out)])
    text = capsys.readouterr().out
    assert code == 0, text
    # the plan states the bar stress against yield and the striker's energy, and defers to the lab's rules
    assert "% of the yield strength" in text and "kinetic energy" in text and "licensed practice" in text
    summary = json.loads((out / "plan.json").read_text())
    (shot,) = summary["shots"]
    assert shot["safety"]["striker_kinetic_energy_J"] > 0 and "licensed practice" in summary["caution"]
    assert not (out / "plan.png").exists()
    # the skeleton loads as a campaign (shpb.campaign): one row per repeat, the design in the setup columns
    campaign = load_campaign(out / "campaign.toml", strict=True)
    assert [r.id for r in campaign.rows] == ["HR-A61-2500-a", "HR-A61-2500-b"]
    spec = campaign.rows[0].shot.specimen
    assert spec.length == pytest.approx(shot["specimen"]["length_m"], abs=1e-5)
    assert spec.length / spec.diameter == pytest.approx(davies_hunter_ratio(0.33), abs=2e-3)  # Davies & Hunter 1963
    assert campaign.rows[0].tags["striker_speed_m_per_s"] == f"{shot['striker']['speed_m_per_s']:.2f}"


def test_plan_refuses_a_bar_that_would_yield(files, tmp_path, capsys):
    # Safety (common practice): a striker whose elastic impact reaches the bar's yield strength is refused
    # unless the user says otherwise (as shpb simulate does, shpb.simulate.check_plan).
    args = ["plan", str(files / "weak_bars.toml"), str(files / "plan.toml"), "--no-preview", "--no-figure",
            "--material", "HR-A61", "--rate", "5000 1/s", "--strain", "0.3", "--out", str(tmp_path / "p")]
    assert main(args) == 2
    assert "yield" in capsys.readouterr().err
    assert not (tmp_path / "p" / "plan.json").exists()
    assert main(args + ["--allow-bar-yield"]) == 1  # planned, and its notes say the limit is exceeded
    assert "exceeds" in capsys.readouterr().out


@pytest.mark.slow
def test_plan_sheet_is_a_figure(files):
    bs = load_barset(files / "bars.toml")
    plan = with_targets(load_plan(files / "plan.toml"), rates=[2500.0], materials=["HR-C10"])
    fig = plot_plan(plan_campaign(plan, bs, preview=False))
    assert isinstance(fig, Figure) and len(fig.axes) == 4


# --------------------------------------------------------------------------- end to end on virtual shots
# Two of the six targets of configs/example_plan.toml run here, one per material, so that the suite stays fast;
# benchmarks/bench_plan.py previews all six and prints each one's rate, strain and verdict.
TARGETS = [("HR-A61", 2500.0), ("HR-C10", 5000.0)]


@pytest.mark.slow
@pytest.mark.parametrize("material, rate", TARGETS, ids=[f"{m}-{r:g}" for m, r in TARGETS])
def test_preview_of_the_plan_reaches_its_target(files, tmp_path, material, rate):
    # The acceptance: the virtual shot of the plan, reduced as a real shot is (shpb.reduce_shot), reaches
    # the target mean rate and final strain within 10 % with a valid verdict.
    bs = load_barset(files / "bars.toml")
    plan = with_targets(load_plan(files / "plan.toml"), rates=[rate], materials=[material])
    out = tmp_path / "plan"
    campaign = plan_campaign(plan, bs, out_dir=out)
    (planned,) = campaign.shots
    (target,) = plan.targets
    pv = planned.preview
    assert pv.valid, pv.flags
    assert pv.mean_rate == pytest.approx(target.strain_rate, rel=TARGET_TOLERANCE)
    assert pv.final_strain == pytest.approx(target.strain, rel=TARGET_TOLERANCE)
    assert planned.met and not planned.design.notes
    assert 1 <= len(planned.history) <= plan.preview["previews"]
    if (material, rate) != ("HR-A61", 2500.0):
        return
    # The campaign skeleton is ready for shpb batch: with each shot's record in place (here the preview's own
    # virtual record) the batch reduces every row, valid.
    written = write_plan(campaign, out, figure=False)
    assert isinstance(campaign, CampaignPlan) and written["shots"].is_file()
    record = pv.files["record"]
    assert record.is_file() and pv.files["shot"].is_file()
    (out / "raw").mkdir()
    for suffix in ("a", "b"):
        shutil.copy(record, out / "raw" / f"{planned.name}-{suffix}.csv")
    assert main(["batch", str(out / "campaign.toml"), "--jobs", "1", "--no-figure", "--out", str(tmp_path / "b")]) == 0
