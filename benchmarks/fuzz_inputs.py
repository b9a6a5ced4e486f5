"""Fuzzing: hypothesis-generated hostile inputs through every reader of user files; zero uncaught exceptions.

Four targets, each fed ``--examples`` inputs (default 2,500 each: 10,000 in all):

* ``units``   — ``units.to_si(text, dimension, where)``: any text, number or unit-like token soup;
* ``record``  — ``io.read_record``: delimited text (random cells, delimiters, headers, blanks, bytes) and
  ``.npz`` archives (random keys, dtypes, shapes), with random channel/time mappings;
* ``toml``    — ``setup.read_toml`` + ``setup.barset_from_dict`` + ``setup.shot_from_dict``: raw text, and a
  valid bar set / shot whose values are replaced, removed or joined by unknown keys;
* ``csv``     — ``campaign.load_campaign``: a valid campaign file beside a generated shots table.

Every input must either load or raise ``shpb.errors.InputError`` whose message names the file (and, for
the setup files, the key): any other exception, or an error that names neither, is a failure. The script
prints the count per target, the failures (first few, with the input), and exits 1 if there is any.

    python benchmarks/fuzz_inputs.py [--examples 2500] [--targets units,record,toml,csv] [--seed 0]

``tests/test_fuzz.py`` runs the same targets with a small budget.
"""

from __future__ import annotations

import argparse
import io
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, given, seed as hyp_seed, settings, strategies as st

from shpb.errors import InputError

UNITS = ["mm", "m", "um", "us", "ms", "s", "ns", "GPa", "MPa", "Pa", "psi", "ksi", "kg/m^3", "g/cm^3", "m/s",
         "degC", "K", "degF", "V", "mV", "kHz", "Hz", "1/s", "J/(kg*K)", "ohm", "in", "ft", "%", "ue", "strain",
         "", " ", "mm mm", "m/s/s", "Msi", "kg", "lbf"]
DIMENSIONS = ["length", "pressure", "density", "time", "frequency", "velocity", "voltage", "resistance",
              "temperature", "strain_rate", "specific_heat", "dimensionless", "mass", "area"]
WEIRD = ["nan", "inf", "-inf", "1e309", "-0", "0x10", "1_000", "½", "١٢", "NaN mm", "1e-400 s", "--1", "+", "e5",
         "\x00", "\u202e5 mm", "5 mm)", "(5 mm", "5 * mm", "5 mm ** 2", "5 mm / 0", "1/0", "__import__", "'5 mm'"]

number_text = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr),
                        st.integers(-10**30, 10**30).map(str), st.sampled_from(WEIRD))
quantity_text = st.one_of(
    st.text(max_size=30),
    st.tuples(number_text, st.sampled_from(UNITS)).map(lambda t: f"{t[0]} {t[1]}"),
    st.sampled_from(WEIRD),
)
quantity_value = st.one_of(quantity_text, st.floats(allow_nan=True), st.integers(-10**20, 10**20), st.booleans(),
                           st.none(), st.lists(st.integers(), max_size=3), st.dictionaries(st.text(max_size=3),
                                                                                           st.integers(), max_size=2))


class Failure(Exception):
    pass


COUNT = [0]  # inputs tried, all targets


def _check_error(exc: BaseException, must_name) -> None:
    """An InputError naming ``must_name`` is a pass; anything else is a failure."""
    if not isinstance(exc, InputError):
        raise Failure(f"{type(exc).__name__}: {exc}") from exc
    text = str(exc)
    if "\n" in text.strip():
        raise Failure(f"more than one line: {text!r}")
    if must_name and not any(n in text for n in must_name):
        raise Failure(f"does not name {must_name}: {text!r}")


# --------------------------------------------------------------------------- units
def target_units(work: Path):
    from shpb.units import to_si

    @given(value=quantity_value, dim=st.sampled_from(DIMENSIONS))
    def run(value, dim):
        COUNT[0] += 1
        try:
            out = to_si(value, dim, "fuzz.toml: bar.key")
        except Exception as exc:  # noqa: BLE001
            _check_error(exc, ["fuzz.toml: bar.key"])
            return
        if not isinstance(out, float):
            raise Failure(f"to_si({value!r}, {dim!r}) returned {out!r}")

    return run


# --------------------------------------------------------------------------- records
cell = st.one_of(number_text, st.floats(-1e3, 1e3).map(lambda x: f"{x:.6g}"), st.text(max_size=6),
                 st.just(""), st.sampled_from(["TIME", "CH1", "CH2", '"1.5"', "1,5", "1e-7"]))


@st.composite
def text_record(draw):
    ncol = draw(st.integers(1, 4))
    delim = draw(st.sampled_from([",", "\t", ";", " ", "  ", ", "]))
    lines = draw(st.lists(st.text(max_size=40).filter(lambda s: "\n" not in s and "\r" not in s), max_size=4))
    if draw(st.booleans()):
        lines.append(delim.join(draw(st.lists(st.sampled_from(["TIME", "CH1", "CH2", "x", ""]), min_size=ncol,
                                              max_size=ncol))))
    n = draw(st.integers(0, 60))
    regular = draw(st.booleans())
    dt = draw(st.sampled_from([1e-7, 1e-9, 1.0, -1e-7, 0.0]))
    for i in range(n):
        if regular and not draw(st.integers(0, 30)) == 0:
            row = [f"{i * dt:.9g}"] + [f"{draw(st.floats(-5, 5)):.4g}" for _ in range(ncol - 1)]
        else:
            row = draw(st.lists(cell, min_size=max(0, ncol - 1), max_size=ncol + 1))
        lines.append(delim.join(row))
    text = "\n".join(lines)
    if draw(st.integers(0, 9)) == 0:
        return text.encode("utf-8", "surrogatepass") + draw(st.binary(max_size=40))
    return text.encode("utf-8", "surrogatepass")


@st.composite
def npz_record(draw):
    arrays = {}
    for key in draw(st.lists(st.sampled_from(["TIME", "CH1", "CH2", "x"]), min_size=0, max_size=4, unique=True)):
        kind = draw(st.sampled_from(["float", "int", "str", "2d", "empty", "nan", "bool"]))
        n = draw(st.integers(0, 50))
        arrays[key] = {"float": lambda: np.linspace(0, 1e-5, n), "int": lambda: np.arange(n),
                       "str": lambda: np.array(["a"] * n), "2d": lambda: np.zeros((n, 2)),
                       "empty": lambda: np.array([]), "nan": lambda: np.full(n, np.nan),
                       "bool": lambda: np.ones(n, bool)}[kind]()
    buf = io.BytesIO()
    np.savez(buf, **arrays)
    data = buf.getvalue()
    if draw(st.integers(0, 5)) == 0 and data:  # a damaged archive
        cut = draw(st.integers(0, len(data)))
        data = data[:cut] + draw(st.binary(max_size=20))
    return data


def target_record(work: Path):
    from shpb.io import read_record
    from shpb.setup import record_from_dict

    column = st.one_of(st.sampled_from(["TIME", "CH1", "CH2", "x", ""]), st.integers(-2, 5))
    unit = st.one_of(st.sampled_from(["s", "us", "ms", "ns", "1e-6 s", "m", "", "0 s", "-1 s", "nan s"]),
                     quantity_value)

    @given(npz=st.booleans(), text=text_record(), arch=npz_record(), inc=column, tra=column,
           time_col=st.one_of(st.none(), column), time_unit=st.one_of(st.none(), unit),
           dt=st.one_of(st.none(), st.sampled_from(["0.1 us", "0 s", "-1 us", "inf s", "1e-300 s"]), unit),
           two_files=st.booleans())
    def run(npz, text, arch, inc, tra, time_col, time_unit, dt, two_files):
        COUNT[0] += 1
        path = work / ("rec.npz" if npz else "rec.csv")
        path.write_bytes(arch if npz else text)
        other = path
        if two_files:
            other = work / ("other.npz" if npz else "other.txt")
            other.write_bytes(arch if npz else text)
        table = {"incident": {"file": path.name, "column": inc}, "transmitted": {"file": other.name, "column": tra}}
        for key, value in (("time", time_col), ("time_unit", time_unit), ("sample_interval", dt)):
            if value is not None:
                table[key] = value
        try:
            read_record(record_from_dict(table, work, "fuzz.toml: record"))
        except Exception as exc:  # noqa: BLE001
            _check_error(exc, [str(path), str(other), "fuzz.toml: record"])

    return run


# --------------------------------------------------------------------------- setup files (TOML)
BARSET = {"name": "fuzz bars (fictional)",
          "bar_material": {"modulus": "200 GPa", "density": "7850 kg/m^3", "poisson_ratio": 0.29,
                           "yield_strength": "1500 MPa"},
          "incident": {"diameter": "20 mm", "length": "1.5 m",
                       "gauge": {"distance": "750 mm", "bridge": "half-bending", "gauge_factor": 2.1,
                                 "excitation": "10 V", "gain": 100, "polarity": -1}},
          "transmitted": {"diameter": "20 mm", "length": "1.5 m",
                          "gauge": {"distance": "500 mm", "bridge": "half-bending", "gauge_factor": 2.1,
                                    "excitation": "10 V", "gain": 100, "polarity": -1}},
          "striker": {"length": "0.3 m", "diameter": "20 mm", "speed": "10 m/s"}}
SHOT = {"name": "fuzz", "barset": "bars.toml",
        "specimen": {"length": "5 mm", "diameter": "10 mm", "material": "AL-X1 (fictional)", "modulus": "70 GPa"},
        "record": {"file": "rec.csv", "incident": "CH1", "transmitted": "CH2", "time": "TIME", "time_unit": "s"},
        "analysis": {"dispersion": False, "stress": "1-wave", "window_length": "100 us"}}


def _paths(d, prefix=()):
    for k, v in d.items():
        yield prefix + (k,)
        if isinstance(v, dict):
            yield from _paths(v, prefix + (k,))


@st.composite
def mutated(draw, template):
    import copy

    data = copy.deepcopy(template)
    paths = list(_paths(data))
    for _ in range(draw(st.integers(1, 4))):
        path = draw(st.sampled_from(paths))
        parent = data
        for k in path[:-1]:
            parent = parent.get(k) if isinstance(parent, dict) else None
            if not isinstance(parent, dict):
                break
        if not isinstance(parent, dict):
            continue
        action = draw(st.sampled_from(["replace", "replace", "delete", "unknown"]))
        if action == "replace":
            parent[path[-1]] = draw(quantity_value)
        elif action == "delete":
            parent.pop(path[-1], None)
        else:
            parent[draw(st.text(min_size=1, max_size=8))] = draw(quantity_value)
    return data


def _to_toml(data) -> str:
    import tomli_w

    def clean(v):  # TOML has no null
        if isinstance(v, dict):
            return {str(k): clean(x) for k, x in v.items() if x is not None}
        if isinstance(v, list):
            return [clean(x) for x in v if x is not None]
        return v

    return tomli_w.dumps(clean(data))


def target_toml(work: Path):
    from shpb.setup import load_barset, load_shot

    (work / "rec.csv").write_text("TIME,CH1,CH2\n" + "".join(f"{i * 1e-7:.7g},0,0\n" for i in range(100)))

    @given(bars=mutated(BARSET), shot=mutated(SHOT), raw=st.one_of(st.none(), st.binary(max_size=80),
                                                                   st.text(max_size=80)), which=st.booleans())
    def run(bars, shot, raw, which):
        COUNT[0] += 1
        bars_path, shot_path = work / "bars.toml", work / "shot.toml"
        bars_path.write_text(_to_toml(bars) if raw is None or which else "")
        shot_path.write_text(_to_toml(shot))
        if raw is not None:
            target = bars_path if which else shot_path
            target.write_bytes(raw if isinstance(raw, bytes) else raw.encode("utf-8", "surrogatepass"))
        try:
            load_barset(bars_path)
            load_shot(shot_path)
        except Exception as exc:  # noqa: BLE001
            _check_error(exc, [str(bars_path), str(shot_path), "bars.toml", "shot.toml"])

    return run


# --------------------------------------------------------------------------- shots tables (CSV)
HEADERS = ["id", "record", "specimen_length [mm]", "specimen_length", "specimen_diameter [mm]",
           "specimen_diameter", "material", "temperature [degC]", "temperature [K]", "dispersion", "stress",
           "window_length", "barset", "record_incident", "record_transmitted", "sample_interval", "tag", "id",
           "specimen_length [furlong]", "window"]


@st.composite
def shots_table(draw):
    header = draw(st.lists(st.sampled_from(HEADERS), min_size=0, max_size=7))
    if draw(st.booleans()):
        header = ["id", "record", "specimen_length [mm]", "specimen_diameter [mm]"] + header
    rows = []
    for i in range(draw(st.integers(0, 5))):
        cells = draw(st.lists(st.one_of(cell, st.sampled_from(["rec.csv", "5.0", "10", "bars.toml", f"S-{i}",
                                                                "yes", "3-wave", "100 us", "../x"])),
                              min_size=0, max_size=len(header) + 2))
        rows.append(",".join(c.replace("\n", " ") for c in cells))
    text = ",".join(header) + "\n" + "\n".join(rows)
    if draw(st.integers(0, 9)) == 0:
        return text.encode("utf-8", "surrogatepass") + draw(st.binary(max_size=20))
    return text.encode("utf-8", "surrogatepass")


def target_csv(work: Path):
    from shpb.campaign import load_campaign

    (work / "rec.csv").write_text("TIME,CH1,CH2\n" + "".join(f"{i * 1e-7:.7g},0,0\n" for i in range(100)))
    (work / "bars.toml").write_text(_to_toml(BARSET))
    (work / "campaign.toml").write_text('name = "fuzz"\nshots = "shots.csv"\nbarset = "bars.toml"\n'
                                        '[record]\nincident = "CH1"\ntransmitted = "CH2"\ntime = "TIME"\n')

    @given(table=shots_table())
    def run(table):
        COUNT[0] += 1
        (work / "shots.csv").write_bytes(table)
        try:
            load_campaign(work / "campaign.toml")
        except Exception as exc:  # noqa: BLE001
            _check_error(exc, ["shots.csv", "campaign.toml"])

    return run


TARGETS = {"units": target_units, "record": target_record, "toml": target_toml, "csv": target_csv}


def fuzz(target: str, examples: int, seed: int = 0, work=None) -> int:
    """Run one target for ``examples`` inputs; raises :class:`Failure` (with the input) on the first failure.

    Returns the number of inputs tried.
    """
    with tempfile.TemporaryDirectory(prefix=f"shpb-fuzz-{target}-", dir=work) as tmp:
        test = TARGETS[target](Path(tmp))
        test = settings(max_examples=examples, deadline=None, database=None,
                        suppress_health_check=list(HealthCheck))(test)
        before = COUNT[0]
        hyp_seed(seed)(test)()
    return COUNT[0] - before


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--examples", type=int, default=2500, help="inputs per target [default: 2500]")
    ap.add_argument("--targets", default=",".join(TARGETS), help="comma-separated targets")
    ap.add_argument("--seed", type=int, default=0)
    args = ap.parse_args(argv)
    total, failed = 0, 0
    for name in args.targets.split(","):
        t0 = time.perf_counter()
        try:
            n = fuzz(name, args.examples, args.seed)
            status = "no uncaught exception"
        except Exception as exc:  # noqa: BLE001 - reported, the next target goes on
            n, status, failed = args.examples, f"FAILED: {type(exc).__name__}: {str(exc)[:400]}", failed + 1
        total += n
        print(f"{name:7s} {n:6d} inputs  {time.perf_counter() - t0:6.1f} s  {status}")
    print(f"total   {total:6d} inputs; {failed} target(s) failed")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
