"""Setup files: units at the edges, and errors that name the file, key and what was expected (common practice)."""

import math

import pytest

from shpb.errors import InputError
from shpb.setup import load_barset, load_shot

BARS = '''
name = "test rig"
[bar_material]
modulus = "190 GPa"
density = "8000 kg/m^3"
poisson_ratio = 0.30
yield_strength = "1900 MPa"
[incident]
diameter = "19.05 mm"
length = "1.5 m"
wave_speed = "4870 m/s"
[incident.gauge]
distance = "750 mm"
bridge = "quarter"
gauge_factor = 2.1
excitation = "10 V"
gain = 100
polarity = -1
[transmitted]
diameter = "0.75 in"
length = "1 m"
modulus = "200 GPa"
[transmitted.gauge]
distance = "250 mm"
excitation = "5 V"
[striker]
length = "300 mm"
'''

SHOT = '''
name = "S-1"
barset = "bars.toml"
[specimen]
length = "5 mm"
diameter = "10 mm"
temperature = "20 degC"
[record]
file = "r.csv"
incident = "CH1"
transmitted = 2
time = "TIME"
time_unit = "us"
'''


def write(tmp_path, bars=BARS, shot=SHOT):
    (tmp_path / "bars.toml").write_text(bars)
    (tmp_path / "shot.toml").write_text(shot)
    return tmp_path / "shot.toml"


def test_load_with_units(tmp_path):
    shot = load_shot(write(tmp_path))
    bs = shot.barset
    assert bs.incident.diameter == pytest.approx(0.01905)
    assert bs.transmitted.diameter == pytest.approx(0.01905)   # 0.75 in, exact inch
    assert bs.incident.wave_speed == 4870.0                      # measured overrides sqrt(E/rho)
    assert bs.transmitted.wave_speed == pytest.approx(math.sqrt(200e9 / 8000))
    assert bs.transmitted.modulus == 200e9 and bs.incident.modulus == 190e9
    assert bs.incident_gauge.polarity == -1 and bs.incident_gauge.bridge == "quarter"
    assert bs.striker.pulse_duration == pytest.approx(2 * 0.3 / math.sqrt(190e9 / 8000))
    assert shot.specimen.temperature == pytest.approx(293.15)
    assert shot.record.time_unit == pytest.approx(1e-6)
    assert shot.record.transmitted.column == 2
    assert shot.analysis.dispersion is True and shot.analysis.stress == "1-wave"


@pytest.mark.parametrize("old, new, fragment", [
    ('diameter = "19.05 mm"', 'diamter = "19.05 mm"', "unknown key 'diamter'"),
    ('distance = "750 mm"', 'distance = "1750 mm"', "not inside the bar"),
    ('bridge = "quarter"', 'bridge = "eighth"', "expected one of quarter"),
    ('poisson_ratio = 0.30', 'poisson_ratio = 0.7', "Poisson ratio between 0 and 0.5"),
    ('modulus = "190 GPa"', 'modulus = "190 mm"', "is not a pressure"),
    ('polarity = -1', 'polarity = 2', "expected 1 or -1"),
    ('excitation = "10 V"', 'excitation = "-10 V"', "expected a positive voltage"),
])
def test_barset_errors(tmp_path, old, new, fragment):
    write(tmp_path, bars=BARS.replace(old, new, 1))
    with pytest.raises(InputError) as exc:
        load_barset(tmp_path / "bars.toml")
    assert "bars.toml" in str(exc.value) and fragment in str(exc.value)


@pytest.mark.parametrize("old, new, fragment", [
    ('length = "5 mm"', 'length = "5 m"', "implausible"),
    ('diameter = "10 mm"', 'diameter = "25 mm"', "exceeds the bar diameter"),
    ('time = "TIME"', '', "give either 'time'"),
    ('length = "5 mm"', 'length = "-5 mm"', "expected a positive length"),
    ('barset = "bars.toml"', 'barset = "missing.toml"', "file not found"),
])
def test_shot_errors(tmp_path, old, new, fragment):
    write(tmp_path, shot=SHOT.replace(old, new, 1))
    with pytest.raises(InputError) as exc:
        load_shot(tmp_path / "shot.toml")
    assert fragment in str(exc.value)


def test_bad_toml(tmp_path):
    write(tmp_path, shot="name = [unclosed")
    with pytest.raises(InputError, match="not valid TOML"):
        load_shot(tmp_path / "shot.toml")


STATION_BARS = BARS.replace('''[incident.gauge]
distance = "750 mm"''', '''[[incident.gauge]]
distance = "750 mm"''').replace('''polarity = -1
[transmitted]''', '''polarity = -1
[[incident.gauge]]
distance = "1.2 m"
gauge_factor = 2.0
excitation = "5 V"
[transmitted]''')


def test_several_gauge_stations_per_bar(tmp_path):
    # [[incident.gauge]]: the first station is the main one (the record's incident channel), the others further
    # stations mapped by [record] incident_stations, in order (docs/setup-files.md)
    shot_text = SHOT.replace('time_unit = "us"', 'time_unit = "us"\nincident_stations = ["CH3"]')
    shot = load_shot(write(tmp_path, STATION_BARS, shot_text))
    bs = shot.barset
    assert bs.incident_gauge.distance == pytest.approx(0.75) and bs.incident_gauge.bridge == "quarter"
    (second,) = bs.incident_stations
    assert second.distance == pytest.approx(1.2) and second.excitation == pytest.approx(5.0)
    assert bs.stations("incident") == (bs.incident_gauge, second) and bs.transmitted_stations == ()
    assert [c.column for c in shot.record.incident_stations] == ["CH3"]
    # a bar set with one [incident.gauge] table still reads as one station
    assert load_shot(write(tmp_path)).barset.incident_stations == ()


@pytest.mark.parametrize("bars, shot_extra, where", [
    (STATION_BARS.replace('distance = "1.2 m"', 'distance = "0.75 m"'), "", "incident.gauge[2].distance"),
    (STATION_BARS, 'incident_stations = ["CH3", "CH4"]', "record.incident_stations"),
    (BARS, 'transmitted_stations = ["CH3"]', "record.transmitted_stations"),
    (STATION_BARS, 'incident_stations = "CH3"', "record.incident_stations"),
])
def test_station_errors_name_the_key(tmp_path, bars, shot_extra, where):
    # two stations at one distance; more channels than stations; a channel list that is not a list
    shot_text = SHOT.replace('time_unit = "us"', f'time_unit = "us"\n{shot_extra}')
    with pytest.raises(InputError, match=where.replace("[", r"\[").replace("]", r"\]")):
        load_shot(write(tmp_path, bars, shot_text))
