"""Campaigns: many shots through the same reduction, in parallel and resumable.

A campaign is a TOML file (name, the table of shots, the default bar set,
``[record]``, ``[specimen]`` and ``[analysis]`` defaults, ``[output]``
options) and a CSV table with one row per shot (``docs/campaigns.md``). Each
row is turned into a :class:`shpb.setup.Shot` by :func:`shpb.setup.shot_from_dict`,
so a campaign row means exactly what a shot file means.

:func:`run_campaign` reduces every shot with :func:`shpb.reduce.reduce_shot`
on a local process pool or on a Dask cluster, writes each shot's folder
(``shots/<id>/``), then the campaign table, the failure list and overlay
figures. It computes no physics itself: the only number it makes is the
flow stress at chosen strains, a linear interpolation of the reduced curve.

Nothing is lost and nothing is half written:

* a shot that cannot be read or reduced is recorded with its stage and
  reason, and the rest go on; a reduced shot with error flags is kept and
  recorded as ``invalid`` with its flags as the reason;
* only the coordinating process writes into the output folder, every file
  atomically (temporary file, then rename), and each shot's key file
  ``inputs.sha256`` last, so a folder with a matching key is complete;
* SIGINT/SIGTERM stop the campaign between shots (the running ones finish,
  unwritten results are dropped); a second signal stops at once;
* a rerun skips shots whose key (SHA-256 of the record files, the resolved
  setup and the package version) is unchanged.
"""

from __future__ import annotations

import csv
import hashlib
import io as _io
import json
import math
import os
import re
import signal
import sys
import tempfile
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterable, Optional

import numpy as np
import pandas as pd

from .errors import InputError, Interrupted, ShpbError
from .runstate import MARKER_FILE, FolderLock, forget_state, input_hashes, slug as _slug, write_state
from .reduce import ShotResult
from .io import (is_number, atomic_savefig, atomic_write_bytes, atomic_write_text, figure_bytes, sha256_file,
                 to_plain)
from .setup import (AnalysisOptions, BarSet, Shot, analysis_from_dict, load_barset, read_toml,
                    shot_from_dict)
from . import schema
from .uncertainty import expanded_name
from .units import DIMENSIONS, to_si

#: Files of a campaign output folder.
SUMMARY_TABLE = "campaign_summary.csv"
SUMMARY_PARQUET = "campaign_summary.parquet"
FAILURES_TABLE = "failures.csv"
REPEATABILITY_TABLE = "repeatability.csv"
FIGURES_DIR = "figures"
CAMPAIGN_FIGURES = ("stress_strain.png", "rate_sensitivity.png", "repeatability.png")
SHOTS_DIR = "shots"
#: Per-shot key file, written last: a folder whose key matches the inputs is complete.
KEY_FILE = "inputs.sha256"
#: Files a shot folder may hold (the result folder of :class:`ShotResult` and the key; anything else is left alone).
_SHOT_FILES = ShotResult.FILES + (KEY_FILE,)

#: Result statuses.
OK, INVALID, FAILED = "ok", "invalid", "failed"

#: Relative spread of strain rate within which shots count as repeats of one rate
#: (a group spans at most this factor above its slowest shot). Common practice in
#: reporting bar campaigns is to quote "nominal" rates; 15 % is our choice.
RATE_GROUP_TOLERANCE = 0.15

# --------------------------------------------------------------------------- the campaign description
_FILE_COLUMNS = ("record", "record_incident", "record_transmitted", "barset")
#: Setup columns come from the one key schema; any other column is a free tag.
_SETUP_COLUMNS = schema.COLUMNS
_KNOWN_COLUMNS = set(_SETUP_COLUMNS) | set(_FILE_COLUMNS) | {"id"}
_HEADER_UNIT = re.compile(r"^(.*?)\s*\[(.*)\]\s*$")


@dataclass(frozen=True)
class CampaignRow:
    """One row of the shots table.

    Attributes
    ----------
    id : str
        Shot id (also its output folder name).
    line : int
        Line of the row in the shots table (1 = header).
    shot : Shot or None
        The shot, or None when the row could not be built (see ``error``).
    tags : dict
        Free tag columns of the row: column header -> cell text.
    error : str or None
        Why the row could not be built (names the row and the column).
    """

    id: str
    line: int
    shot: Optional[Shot]
    tags: dict = field(default_factory=dict)
    error: Optional[str] = None


@dataclass(frozen=True)
class Campaign:
    """A campaign: shared defaults and the shots built from the table.

    Attributes
    ----------
    name : str
    path : Path
        The campaign TOML file; relative paths are taken from its folder.
    shots_path : Path
        The shots table (CSV).
    rows : tuple of CampaignRow
        In table order.
    tag_columns : tuple of str
        Free tag columns, in table order.
    flow_strains : tuple of float
        Engineering strains [1] at which the flow stress is reported.
    rate_plot_strain : float
        Strain [1] of the rate-sensitivity and repeatability figures.
    rate_group_tolerance : float
        Relative rate spread [1] within which shots are repeats of one rate.
    """

    name: str
    path: Path
    shots_path: Path
    rows: tuple
    tag_columns: tuple = ()
    flow_strains: tuple = (0.05,)
    rate_plot_strain: float = 0.05
    rate_group_tolerance: float = RATE_GROUP_TOLERANCE

    @property
    def base_dir(self) -> Path:
        """Folder of the campaign file."""
        return self.path.parent

    @property
    def default_out(self) -> Path:
        """Default output folder: ``results/<campaign name>`` beside the campaign file."""
        return self.base_dir / "results" / _slug(self.name)

    @property
    def row_errors(self) -> list:
        """Rows that could not be built, as ``(id, line, message)``."""
        return [(r.id, r.line, r.error) for r in self.rows if r.error]


def shot_folders(out_dir) -> list:
    """The shot result folders of a campaign output folder (``<out>/shots/<id>/``), sorted by name."""
    shots = Path(out_dir) / SHOTS_DIR
    return sorted(p for p in shots.iterdir() if p.is_dir()) if shots.is_dir() else []


def _check_id(shot_id: str, where: str) -> None:
    if not shot_id:
        raise InputError("empty shot id", where)
    if shot_id.startswith(".") or any(c in shot_id for c in '/\\:*?"<>|') or any(ord(c) < 32 for c in shot_id):
        raise InputError(f"shot id {shot_id!r} cannot be a folder name (no leading dot, no / \\ : * ? \" < > |)",
                         where)


def _quantity_cell(text: str, unit: Optional[str], dimension: str, where: str) -> float:
    """A cell of a quantity column -> SI float; the header unit applies to bare numbers."""
    if unit:
        if not is_number(text):
            raise InputError(f"expected a number in {unit} (the unit is in the header), got {text!r}", where)
        return to_si(f"{text} {unit}", dimension, where)
    if is_number(text):  # a bare number is SI, as everywhere in shpb
        return to_si(float(text), dimension, where)
    return to_si(text, dimension, where)


def _read_shots_table(path: Path):
    """Header (name, unit) pairs and data rows ``(line, cells)`` of the shots CSV."""
    if not path.is_file():
        raise InputError("file not found (the shots table)", str(path))
    try:
        text = path.read_text(encoding="utf-8-sig")  # a BOM from spreadsheet exports is dropped
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc.reason} at byte {exc.start})", str(path)) from None
    reader = csv.reader(_io.StringIO(text))
    header, rows = None, []
    for cells in reader:
        if not any(c.strip() for c in cells) or cells[0].strip().startswith("#"):
            continue
        if header is None:
            header = [c.strip() for c in cells]
            header_line = reader.line_num
            continue
        rows.append((reader.line_num, [c.strip() for c in cells]))
    if header is None:
        raise InputError("no header row (expected columns id, record, specimen_length, specimen_diameter, ...)",
                         str(path))
    cols = []
    for h in header:
        m = _HEADER_UNIT.match(h)
        name, unit = (m.group(1).strip(), m.group(2).strip()) if m else (h, None)
        cols.append((name, unit, h))
    names = [c[0] for c in cols]
    for name in set(names):
        if names.count(name) > 1:
            raise InputError(f"column {name!r} appears {names.count(name)} times", f"{path} line {header_line}")
    return cols, rows, header_line


def _row_dict(cols, cells, where_row: str, barsets: Callable[[str, str], BarSet], record_defaults: dict,
              specimen_defaults: dict):
    """The shot mapping for :func:`shot_from_dict` from one row, its bar set and its tags."""
    data = {"specimen": dict(specimen_defaults), "record": dict(record_defaults)}
    tags, files, barset_cell = {}, {}, None
    for (name, unit, header), text in zip(cols, cells):
        where = f"{where_row}, column {header!r}"
        if name == "id":
            continue
        if name not in _KNOWN_COLUMNS:
            tags[header] = text
            continue
        key = _SETUP_COLUMNS[name] if name in _SETUP_COLUMNS else None
        if unit and (key is None or key.kind not in DIMENSIONS):
            raise InputError(f"column {name!r} takes no unit in its header", where)
        if text == "":
            continue  # empty cell: the campaign default
        if key is not None:
            value = _quantity_cell(text, unit, key.kind, where) if key.kind in DIMENSIONS else key.parse(text, where)
            data.setdefault(key.section, {})[key.name] = value
        elif name == "barset":
            barset_cell = (text, where)
        else:
            files[name] = text
    rec = data["record"]
    if "record" in files:
        if "record_incident" in files or "record_transmitted" in files:
            raise InputError("give either 'record' (one file) or 'record_incident' and 'record_transmitted'",
                             where_row)
        rec["file"] = files["record"]
    elif "record_incident" in files and "record_transmitted" in files:
        rec.pop("file", None)
        for ch in ("incident", "transmitted"):
            column = rec.get(ch)
            if isinstance(column, dict):
                column = column.get("column")
            if column is None:
                raise InputError(f"no {ch} column in the campaign's [record] table", where_row)
            rec[ch] = {"file": files[f"record_{ch}"], "column": column}
    elif "record_incident" in files or "record_transmitted" in files:  # not silently the campaign's file
        raise InputError("give both 'record_incident' and 'record_transmitted' (or 'record')", where_row)
    elif "file" not in rec:
        raise InputError("empty 'record' cell (the record file of the shot)", where_row)
    barset = barsets(*barset_cell) if barset_cell else barsets(None, where_row)
    if not data.get("analysis"):
        data.pop("analysis", None)
    return data, barset, tags


def load_campaign(path, strict: bool = False, extra_records=(), allow_empty: bool = False) -> Campaign:
    """Load a campaign TOML file and build every row of its shots table into a shot.

    Parameters
    ----------
    path : str or Path
        The campaign TOML file (see ``docs/campaigns.md``).
    strict : bool
        Raise on the first row that cannot be built instead of keeping it as
        a failed row (``CampaignRow.error``).
    extra_records : sequence of paths
        Record files that no row of the table names (``shpb watch``): each
        becomes a row of its own, as if the table had a line with only its
        ``id`` (the file's stem) and ``record`` cells, so it takes every
        other value from the campaign's defaults. Such a row's ``line`` is 0.
    allow_empty : bool
        Accept a table with a header and no rows (a campaign that
        ``shpb watch`` fills from the campaign's defaults).

    Returns
    -------
    Campaign

    Raises
    ------
    InputError
        A campaign-level problem: the campaign file, its default bar set or
        the shots table is missing or malformed, a required column is
        missing, shot ids repeat. Row problems raise only when ``strict``.
    """
    path = Path(path)
    data = read_toml(path)
    src = str(path)  # messages name the file as the user gave it
    path = path.absolute()  # shots carry absolute paths: workers may run elsewhere
    allowed = {"name", "shots", "barset", "tags", "record", "specimen", "analysis", "output"}
    for key in data:
        if key not in allowed:
            raise InputError(f"unknown key {key!r} (expected one of: {', '.join(sorted(allowed))})", src)
    base = path.parent
    if not isinstance(data.get("shots"), str):
        raise InputError("missing key 'shots' (path of the shots table, CSV)", src)
    name = str(data.get("name", path.stem))
    for key in ("record", "specimen", "analysis", "output"):
        if key in data and not isinstance(data[key], dict):
            raise InputError("expected a table", f"{src}: {key}")
    analysis_base = analysis_from_dict(data.get("analysis", {}), f"{src}: analysis", AnalysisOptions())
    record_defaults = dict(data.get("record", {}))
    specimen_table = data.get("specimen", {})
    schema.check_names(specimen_table, schema.SPECIMEN_KEYS, f"{src}: specimen")
    specimen_defaults = {k.name: k.parse(specimen_table[k.name], f"{src}: specimen.{k.name}")
                         for k in schema.SPECIMEN_KEYS if k.name in specimen_table}
    flow_strains, plot_strain, tol = _output_options(data.get("output", {}), f"{src}: output")

    # bar sets: the default once, each override once
    cache: dict = {}
    default_bs = None
    if "barset" in data:
        if not isinstance(data["barset"], str):
            raise InputError("expected a path", f"{src}: barset")
        default_bs = load_barset(base / data["barset"])

    def barsets(cell: Optional[str], where: str) -> BarSet:
        if cell is None:
            if default_bs is None:
                raise InputError("no bar set: give 'barset' in the campaign file or a 'barset' column", where)
            return default_bs
        p = (base / cell).resolve()
        if p not in cache:
            try:
                cache[p] = load_barset(p)
            except InputError as exc:
                cache[p] = exc
        if isinstance(cache[p], InputError):
            raise InputError(f"bar set {cell!r}: {cache[p]}", where)
        return cache[p]

    shots_path = base / data["shots"]
    cols, raw_rows, header_line = _read_shots_table(shots_path)
    names = [c[0] for c in cols]
    where_header = f"{shots_path.name} line {header_line}"
    for required in ("id", "specimen_length", "specimen_diameter"):
        if required not in names and not (required != "id" and required.split("_", 1)[1] in specimen_defaults):
            raise InputError(f"missing column {required!r}", where_header)
    if "record" not in names and not {"record_incident", "record_transmitted"} <= set(names) \
            and "file" not in record_defaults:
        raise InputError("missing column 'record' (or 'record_incident' and 'record_transmitted')", where_header)
    if extra_records:
        if "record" not in names:  # a row of its own names its file in a 'record' column
            cols = cols + [("record", None, "record")]
            names.append("record")
            raw_rows = [(line, cells + [""] * (len(cols) - 1 - len(cells))) for line, cells in raw_rows]
        for rec in extra_records:
            cells = [""] * len(cols)
            cells[names.index("id")] = Path(rec).stem
            cells[names.index("record")] = str(Path(rec).absolute())
            raw_rows.append((0, cells))
    declared_tags = data.get("tags")
    for n, _, h in cols:
        if n in schema.RENAMED:  # an old key name must not silently become a free tag
            raise InputError(f"column {h!r}: the key {n!r} is now called {schema.RENAMED[n]!r}", where_header)
    tag_columns = tuple(h for n, _, h in cols if n not in _KNOWN_COLUMNS)
    if declared_tags is not None:
        if not isinstance(declared_tags, list) or not all(isinstance(t, str) for t in declared_tags):
            raise InputError("expected a list of column names", f"{src}: tags")
        extra = [h for h in tag_columns if h not in declared_tags]
        if extra:  # with declared tags, an unknown column is a typo, not a tag
            raise InputError(f"unknown column {extra[0]!r} (not a shot column and not in the campaign's tags "
                             f"list)", where_header)
    id_index = names.index("id")
    rows, seen = [], {}
    for line, cells in raw_rows:
        if len(cells) > len(cols) and any(cells[len(cols):]):
            err = InputError(f"{len(cells)} cells but {len(cols)} columns in the header", f"{shots_path.name} "
                             f"line {line}")
            if strict:
                raise err
            rows.append(CampaignRow(id=f"line-{line}", line=line, shot=None, error=str(err)))
            continue
        cells = cells + [""] * (len(cols) - len(cells))
        shot_id = cells[id_index]
        where_row = f"{shots_path.name} line {line} (shot {shot_id or '?'})"
        try:
            _check_id(shot_id, f"{where_row}, column 'id'")
            key = shot_id.casefold()  # case-insensitive: folders must not collide on any file system
            if key in seen:
                if line == 0:  # a record without a row whose stem is another row's id
                    raise InputError(f"the record {cells[names.index('record')]} has no row, and its name is the id "
                                     f"of line {seen[key]}: give it a row", str(shots_path))
                raise InputError(f"shot id {shot_id!r} repeats line {seen[key]}", f"{shots_path.name} line {line}")
            seen[key] = line
        except InputError:
            if strict or shot_id:
                raise  # a campaign cannot hold two shots with one folder
            rows.append(CampaignRow(id=f"line-{line}", line=line, shot=None,
                                    error=f"{shots_path.name} line {line}, column 'id': empty shot id"))
            continue
        tags = {}
        try:
            shot_data, barset, tags = _row_dict(cols, cells, where_row, barsets, record_defaults, specimen_defaults)
            shot_data["name"] = shot_id
            shot = shot_from_dict(shot_data, base, where_row, barset=barset, analysis_base=analysis_base)
        except InputError as exc:
            if strict:
                raise InputError(_name_column(str(exc), where_row, cols)) from None
            tags = tags or {h: c for (n, _, h), c in zip(cols, cells) if n not in _KNOWN_COLUMNS}
            rows.append(CampaignRow(id=shot_id, line=line, shot=None, tags=tags,
                                    error=_name_column(str(exc), where_row, cols)))
            continue
        rows.append(CampaignRow(id=shot_id, line=line, shot=shot, tags=tags))
    if not rows and not allow_empty:
        raise InputError("no shots (the table has a header but no rows)", str(shots_path))
    return Campaign(name=name, path=path, shots_path=shots_path, rows=tuple(rows), tag_columns=tag_columns,
                    flow_strains=flow_strains, rate_plot_strain=plot_strain, rate_group_tolerance=tol)


def _name_column(message: str, where_row: str, cols) -> str:
    """Say which table column a key in a shot-file message came from (``specimen.diameter`` -> the column)."""
    for name, _, header in cols:
        key = _SETUP_COLUMNS.get(name)
        if key is not None:
            message = message.replace(f"{where_row}: {key.section}.{key.name}:", f"{where_row}, column {header!r}:")
    return message


def _output_options(out: dict, where: str):
    allowed = {"flow_strains", "rate_plot_strain", "rate_group_tolerance"}
    for key in out:
        if key not in allowed:
            raise InputError(f"unknown key {key!r} (expected one of: {', '.join(sorted(allowed))})", where)
    raw = out.get("flow_strains", [0.05])
    if not isinstance(raw, list) or not raw:
        raise InputError("expected a list of strains, e.g. [0.02, 0.05, 0.1]", f"{where}.flow_strains")
    strains = tuple(to_si(v, "dimensionless", f"{where}.flow_strains") for v in raw)
    if any(not 0 < s < 1 for s in strains):
        raise InputError(f"expected engineering strains between 0 and 1, got {raw}", f"{where}.flow_strains")
    plot = to_si(out.get("rate_plot_strain", strains[0]), "dimensionless", f"{where}.rate_plot_strain")
    if not 0 < plot < 1:
        raise InputError(f"expected an engineering strain between 0 and 1, got {plot:g}", f"{where}.rate_plot_strain")
    if plot not in strains:
        strains = strains + (plot,)
    tol = to_si(out.get("rate_group_tolerance", RATE_GROUP_TOLERANCE), "dimensionless",
                f"{where}.rate_group_tolerance")
    if not 0 < tol < 1:
        raise InputError(f"expected a fraction between 0 and 1, got {tol}", f"{where}.rate_group_tolerance")
    return strains, plot, tol


# --------------------------------------------------------------------------- numbers for the table
def flow_stress_at(strain, stress, valid, at):
    """Flow stress at a given strain (or at each of several), interpolated linearly on the valid part of a curve.

    Parameters
    ----------
    strain : array_like
        Engineering strain [1].
    stress : array_like
        Engineering stress (any unit; the result has the same one).
    valid : array_like of bool
        Samples inside the valid (equilibrium, loading) part.
    at : float or array_like
        Strain(s) [1] at which to read the stress.

    Returns
    -------
    float or ndarray
        The stress at ``at`` (an array for an array); NaN where ``at`` is
        outside the strain range of the valid part (no extrapolation).
    """
    strain = np.asarray(strain, dtype=float)
    stress = np.asarray(stress, dtype=float)
    at_arr = np.asarray(at, dtype=float)
    v = np.asarray(valid, dtype=bool) & np.isfinite(strain) & np.isfinite(stress)
    if not v.any():
        out = np.full(at_arr.shape, np.nan)
    else:
        x, y = strain[v], stress[v]
        order = np.argsort(x, kind="stable")  # strain rises while loading; sorting guards a noisy wobble
        out = np.interp(at_arr, x[order], y[order])
        out = np.where((at_arr >= x.min()) & (at_arr <= x.max()), out, np.nan)
    return float(out) if out.ndim == 0 else out


def rate_groups(rates, tolerance: float = RATE_GROUP_TOLERANCE) -> np.ndarray:
    """Group strain rates into repeats of one nominal rate.

    Sorted rates are scanned from the slowest; a group takes every rate at
    most ``(1 + tolerance)`` times its slowest member.

    Parameters
    ----------
    rates : array_like
        Strain rates [1/s]; NaN rates get group -1.
    tolerance : float
        Relative spread allowed in one group [1].

    Returns
    -------
    ndarray of int
        Group number of each rate (0 = slowest group).
    """
    rates = np.asarray(rates, dtype=float)
    out = np.full(rates.shape, -1, dtype=int)
    ok = np.flatnonzero(np.isfinite(rates))
    group, lo = -1, None
    for i in ok[np.argsort(rates[ok], kind="stable")]:
        if lo is None or rates[i] > lo * (1 + tolerance):
            group, lo = group + 1, rates[i]
        out[i] = group
    return out


def _flow_column(strain: float) -> str:
    return f"flow_stress_MPa_at_{strain:g}"


#: Summary results that the campaign table gives with their expanded uncertainty (``U95_`` column beside).
U_RESULTS = ("mean_strain_rate_per_s", "yield_strain", "yield_stress_MPa")


def _and_u(columns) -> list:
    """The columns, each of :data:`U_RESULTS` followed by its ``U95_`` column."""
    return [c for col in columns for c in ((col, expanded_name(col)) if col in U_RESULTS else (col,))]


def shot_row(summary: dict, curves: pd.DataFrame, flow_strains: Iterable[float]) -> dict:
    """The campaign-table fields of one reduced shot, from its summary and curves.

    Parameters
    ----------
    summary : dict
        The shot's ``summary.json`` content.
    curves : pandas.DataFrame
        The shot's ``curves.csv`` (columns ``strain``, ``stress_MPa``, ``valid``).
    flow_strains : iterable of float
        Strains [1] for the ``flow_stress_MPa_at_<strain>`` columns.
    """
    r = summary.get("results", {})
    inputs = summary.get("inputs", {})
    sp = inputs.get("specimen", {})
    cal = (inputs.get("barset") or {}).get("calibration") or {}

    def num(key):
        v = r.get(key)
        return float(v) if isinstance(v, (int, float)) and not isinstance(v, bool) else float("nan")

    row = {
        "material": sp.get("material", ""),
        "temperature_K": sp.get("temperature_K") if sp.get("temperature_K") is not None else float("nan"),
        "specimen_length_mm": sp["length_m"] * 1e3 if "length_m" in sp else float("nan"),
        "specimen_diameter_mm": sp["diameter_m"] * 1e3 if "diameter_m" in sp else float("nan"),
        "mean_strain_rate_per_s": num("mean_strain_rate_per_s"),
        "strain_rate_cv": num("strain_rate_cv"),
        "peak_stress_MPa": num("peak_stress_MPa"),
    }
    strain, stress, valid = (curves[c].to_numpy() for c in ("strain", "stress_MPa", "valid"))
    # U95 of the flow stress from the summary's table of it (linear between its strains; NaN outside it, or
    # without the uncertainty stage)
    table = (summary.get("uncertainty") or {}).get("flow_stress") or {}
    table_strain = table.get("strain", [])
    for e in flow_strains:
        row[_flow_column(e)] = flow_stress_at(strain, stress, valid.astype(bool), e)
        row[expanded_name(_flow_column(e))] = flow_stress_at(table_strain, table.get("U95_MPa", []),
                                                             np.ones(len(table_strain), bool), e)
    for key in U_RESULTS:
        row[expanded_name(key)] = num(expanded_name(key))
    dominant = ((summary.get("uncertainty") or {}).get("dominant_inputs") or {}).get("flow_stress_mean_MPa") or []
    row["dominant_input"] = dominant[0] if dominant else ""
    row.update({
        "yield_strain": num("yield_strain"),
        "yield_stress_MPa": num("yield_stress_MPa"),
        "valid_fraction_of_loading": num("valid_fraction_of_loading"),
        "equilibrium_from_strain": num("equilibrium_from_strain"),
        "max_strain": num("max_strain"),
        "flags": ";".join(f["code"] for f in summary.get("flags", [])),
        "valid": bool(summary.get("valid", False)),
        "calibration": json.dumps(cal, sort_keys=True, separators=(",", ":")) if cal else "",
    })
    return row


#: Columns of curves.csv the campaign table and overlays read.
_ROW_COLUMNS = ("strain", "stress_MPa", "valid")


def _overlay_curve(curves: pd.DataFrame, max_points: int = 400):
    """The valid part of a curve, thinned for overlay figures: (strain [1], stress [MPa])."""
    v = curves["valid"].to_numpy().astype(bool)
    x, y = curves["strain"].to_numpy()[v], curves["stress_MPa"].to_numpy()[v]
    step = max(1, int(math.ceil(x.size / max_points)))
    return x[::step], y[::step]


# --------------------------------------------------------------------------- the key of a shot's inputs
def _package_version() -> str:
    import shpb

    return shpb.__version__


def _rel(path, base_dir: Path) -> str:
    try:
        return Path(os.path.relpath(Path(path), base_dir)).as_posix()
    except ValueError:  # another drive (Windows)
        return Path(path).as_posix()


def record_files(shot: Shot) -> list:
    """The record files a shot reads (one, or one per channel)."""
    return sorted({shot.record.incident.file, shot.record.transmitted.file}, key=str)


def shot_key(shot: Shot, record_hashes: dict, base_dir) -> str:
    """SHA-256 over what a shot's result depends on.

    Parameters
    ----------
    shot : Shot
        The resolved setup (bar set, specimen, record mapping, analysis).
    record_hashes : dict
        Record file path -> SHA-256 of its content.
    base_dir : str or Path
        Campaign folder; paths enter the key relative to it, so a moved
        campaign folder keeps its keys.

    Returns
    -------
    str
        Hex digest. It changes with any record byte, any setup value and the
        package version.
    """
    base_dir = Path(base_dir)
    payload = {
        "package_version": _package_version(),
        # where the setup was read from ("source") and the sample ceiling do not change the result; NaN kept
        "setup": to_plain(shot, nonfinite="keep", path=lambda p: _rel(p, base_dir), skip_fields={"source", "max_samples"}),
        "records": {_rel(p, base_dir): h for p, h in sorted(record_hashes.items())},
    }
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"), default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


# --------------------------------------------------------------------------- one shot (runs on a worker)
def _scratch_dir() -> Optional[str]:
    """A memory-backed folder for a worker's private copy of a result (fsync costs nothing there)."""
    shm = "/dev/shm"
    return shm if os.path.isdir(shm) and os.access(shm, os.W_OK) else None


def _failed(shot_id, stage, reason):
    return {"id": shot_id, "status": FAILED, "stage": stage, "reason": reason, "files": {}, "key": None,
            "row": None, "curve": None}


def _one_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    msg = text[0] if text else ""
    if isinstance(exc, ShpbError):
        return msg
    return f"unexpected {type(exc).__name__}: {msg}"  # a bug, but the campaign goes on


def reduce_task(shot: Shot, figures: bool, base_dir: str, flow_strains: tuple, announce=None) -> dict:
    """Reduce one shot and return its output files as bytes, never raising.

    The same function runs in a local process pool, in the coordinating
    process (``jobs=1``) and on Dask workers, so every path gives the same
    bytes. The result folder is written by :meth:`shpb.reduce.ShotResult.write`
    into a private temporary folder and read back, so a campaign's files are
    exactly those of ``shpb reduce``.

    ``announce(result)``, when given (in this process only), is called
    with the :class:`shpb.reduce.ShotResult` as soon as the shot is judged,
    before its uncertainty stage (so without its results) and before its
    figure is drawn: ``shpb watch`` prints the verdict from it.

    Returns
    -------
    dict
        ``id``, ``status`` (ok / invalid / failed), ``stage`` (read, reduce,
        write, validity or empty), ``reason``, ``files`` (name -> bytes),
        ``key`` (see :func:`shot_key`), ``row`` (see :func:`shot_row`),
        ``curve`` (valid part for overlays).
    """
    global _in_task
    _in_task = True
    try:
        return _reduce_task(shot, figures, base_dir, flow_strains, announce)
    finally:
        _in_task = False


def _reduce_task(shot, figures, base_dir, flow_strains, announce=None):
    from .io import read_record
    from .reduce import reduce_shot

    try:
        rec = read_record(shot.record)
    except Exception as exc:  # noqa: BLE001 - nothing lost: any failure is recorded
        return _failed(shot.name, "read", _one_line(exc))
    key = shot_key(shot, rec.files, base_dir)
    try:
        result = reduce_shot(shot, rec, announce=announce)  # announced before the uncertainty stage
    except Exception as exc:  # noqa: BLE001
        return _failed(shot.name, "reduce", _one_line(exc))
    try:
        with tempfile.TemporaryDirectory(prefix=f"shpb-shot-{os.getpid()}-", dir=_scratch_dir()) as tmp:
            result.write(tmp, figure=figures)  # the figure sheet uses no pyplot: thread-safe
            files = {p.name: p.read_bytes() for p in Path(tmp).iterdir() if p.name in _SHOT_FILES}
        # the table row is made from the written bytes, exactly as a rerun reads them back from disk
        summary = json.loads(files[ShotResult.SUMMARY_FILE])
        curves = pd.read_csv(_io.BytesIO(files[ShotResult.CURVES_FILE]), usecols=list(_ROW_COLUMNS))
        row = shot_row(summary, curves, flow_strains)
        curve = _overlay_curve(curves)
    except Exception as exc:  # noqa: BLE001
        return _failed(shot.name, "write", _one_line(exc))
    errors = [f for f in result.flags if f.severity == "error"]
    status = OK if result.valid else INVALID
    reason = "; ".join(f"{f.code}: {f.message}" for f in errors)
    return {"id": shot.name, "status": status, "stage": "validity" if errors else "", "reason": reason,
            "files": files, "key": key, "row": row, "curve": curve}


_in_task = False  # True while a worker process is inside reduce_task


def _worker_terminated(signum, frame):
    if _in_task:
        raise SystemExit(128 + signum)  # unwinds the shot: its temporary folder is removed on the way out
    os._exit(128 + signum)  # idle: nothing to clean up


def _set_parent_death_signal(sig) -> bool:
    """Linux: have the kernel send ``sig`` to this process when the thread that created it ends.

    ``prctl(PR_SET_PDEATHSIG)`` fires on the death of the creating *thread*;
    the workers are started from the thread that runs the campaign, which
    outlives them (they are shut down before :func:`run_campaign` returns).
    """
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        return libc.prctl(1, int(sig), 0, 0, 0) == 0  # 1 = PR_SET_PDEATHSIG (linux/prctl.h)
    except (OSError, AttributeError):
        return False


def _watch_parent(parent_pid: int, interval: float = 0.5) -> None:
    """Everywhere (and behind the death signal): end this worker once its parent is gone."""
    def watch():
        while True:
            time.sleep(interval)
            if os.getppid() != parent_pid:
                os.kill(os.getpid(), signal.SIGTERM)  # unwinds a running shot (its temporary folder goes)
                time.sleep(5.0)
                os._exit(1)

    threading.Thread(target=watch, name="shpb-parent-watch", daemon=True).start()


def _worker_init(parent_pid: int) -> None:
    """A worker: Ctrl-C is the coordinator's to handle; it dies with the coordinator, however that dies."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, _worker_terminated)
    _set_parent_death_signal(signal.SIGTERM)
    if os.getppid() != parent_pid:  # the coordinator died before the death signal was armed
        os._exit(1)
    _watch_parent(parent_pid)


def _worker_main(conn, parent_pid: int) -> None:
    """A worker process: run the shots the coordinator sends over ``conn``, one at a time."""
    _worker_init(parent_pid)
    while True:
        try:
            msg = conn.recv()
        except (EOFError, OSError):
            os._exit(0)  # the coordinator closed the pipe
        if msg is None:
            os._exit(0)
        kind, args = msg  # looked up by name here, at call time: "shot" or "figure"
        res = (reduce_task if kind == "shot" else _figure_task)(*args)
        try:
            conn.send(res)
        except (OSError, ValueError):
            os._exit(0)


def _death_cause(exitcode) -> str:
    """What ended a worker process, in words."""
    if exitcode is None:
        return "the worker process stopped answering"
    if exitcode < 0:
        try:
            name = signal.Signals(-exitcode).name
        except ValueError:
            name = f"signal {-exitcode}"
        if -exitcode == signal.SIGKILL:
            return f"the worker process was killed by {name} (the out-of-memory killer sends it, as does kill -9)"
        return f"the worker process was ended by {name}"
    return f"the worker process exited with status {exitcode}"


class _Worker:
    def __init__(self, ctx):
        self.conn, child = ctx.Pipe(duplex=True)
        self.proc = ctx.Process(target=_worker_main, args=(child, os.getpid()), name="shpb-worker", daemon=True)
        self.proc.start()
        child.close()
        self.shot = None  # the shot it runs now

    def stop(self, timeout: float) -> None:
        if self.proc.is_alive():
            try:
                self.conn.send(None) if self.shot is None else self.proc.terminate()
            except (OSError, ValueError):
                self.proc.terminate()
        self.proc.join(timeout)
        if self.proc.is_alive():
            self.proc.kill()
            self.proc.join(5.0)
        self.conn.close()
        _clean_scratch(self.proc.pid)


def _clean_scratch(pid) -> None:
    """Remove the temporary folders a dead worker left (its shots' private copies)."""
    import glob
    import shutil

    for d in glob.glob(os.path.join(_scratch_dir() or tempfile.gettempdir(), f"shpb-shot-{pid}-*")):
        shutil.rmtree(d, ignore_errors=True)


def _local_results(tasks, jobs: int, figures, base_dir, flow_strains, stop: "_StopFlag", tail=None):
    """Yield task results as they complete, from worker processes (or in this process when jobs = 1).

    Each worker has its own pipe, so the coordinator always knows which shot
    each one runs. A worker that dies (killed, out of memory, crashed) is
    replaced; its shot is given once more to a fresh worker, and a shot that
    ends two workers is recorded as failed with the cause. The other shots
    are not touched.

    ``tail()``, called once every shot result has been taken, returns more
    work for the same (warm) workers: ``(name, "figure", args)`` items whose
    results are yielded too (the campaign figures). A tail item whose worker
    dies is yielded as ``{"figure": name, "error": ...}``.
    """
    if jobs <= 1 or len(tasks) <= 1:
        for shot in tasks:
            stop.check()
            yield reduce_task(shot, figures, base_dir, flow_strains)
        return
    import collections
    import multiprocessing
    from multiprocessing.connection import wait

    ctx = multiprocessing.get_context()
    queue = collections.deque(tasks)
    deaths: dict = {}
    workers: list = []
    n = min(jobs, len(tasks))
    try:
        while queue or any(w.shot is not None for w in workers):
            stop.check()
            while queue and (len(workers) < n or any(w.shot is None for w in workers)):
                w = next((w for w in workers if w.shot is None), None)
                if w is None:
                    w = _Worker(ctx)
                    workers.append(w)
                w.shot = queue.popleft()
                w.conn.send(("shot", (w.shot, figures, base_dir, flow_strains)))
            busy = [w for w in workers if w.shot is not None]
            wait([w.conn for w in busy] + [w.proc.sentinel for w in busy], timeout=0.2)
            for w in busy:
                res = None
                try:
                    if w.conn.poll():
                        res = w.conn.recv()
                except (EOFError, OSError):
                    res = None
                if res is not None:
                    w.shot = None
                    yield res
                    continue
                if w.proc.is_alive():
                    continue
                # the worker died with a shot: replace it; the shot gets one more worker
                shot, w.shot = w.shot, None
                workers.remove(w)
                w.stop(1.0)
                cause = _death_cause(w.proc.exitcode)
                deaths.setdefault(shot.name, []).append(cause)
                if len(deaths[shot.name]) >= 2:
                    yield _failed(shot.name, "worker", f"{cause}, twice on this shot (first: "
                                                       f"{deaths[shot.name][0]})")
                else:
                    queue.appendleft(shot)
        if tail is not None:
            yield from _tail_on_workers(tail(), workers, stop, wait)
    finally:
        for w in workers:
            if w.shot is not None:
                w.proc.terminate()  # stopped: the shot unwinds and its temporary folder is removed
        for w in workers:
            w.stop(10.0)


def _tail_on_workers(items, workers, stop, wait):
    """Run ``(name, kind, args)`` items on idle live workers; yield their results (or an error marker)."""
    import collections

    items = collections.deque(items)
    pending: dict = {}
    while items or pending:
        stop.check()
        for w in workers:
            if items and w not in pending and w.proc.is_alive():
                name, kind, args = items.popleft()
                w.shot = name
                try:
                    w.conn.send((kind, args))
                except (OSError, ValueError):
                    w.shot = None
                    yield {"figure": name, "error": "the worker process is gone"}
                    continue
                pending[w] = name
        if not pending:
            break  # no live worker left
        wait([w.conn for w in pending] + [w.proc.sentinel for w in pending], timeout=0.2)
        for w, name in list(pending.items()):
            try:
                res = w.conn.recv() if w.conn.poll() else None
            except (EOFError, OSError):
                res = None
            if res is None and w.proc.is_alive():
                continue
            del pending[w]
            w.shot = None
            yield res if res is not None else {"figure": name, "error": _death_cause(w.proc.exitcode)}
    for name, _, _ in items:
        yield {"figure": name, "error": "no worker process left"}


# --------------------------------------------------------------------------- the campaign run
@dataclass
class ShotOutcome:
    """What happened to one shot of a campaign run.

    Attributes
    ----------
    id : str
    line : int
        Line in the shots table.
    status : str
        ``ok`` (reduced, valid), ``invalid`` (reduced, error flags) or
        ``failed`` (no result).
    stage : str
        Where a failure happened: ``setup`` (the row), ``read`` (the
        record), ``reduce``, ``write``; ``validity`` for invalid shots.
    reason : str
        One line (the error, or the error flags).
    skipped : bool
        True when the shot's outputs were up to date and were kept.
    stale : bool
        True when the shot's record cannot be read now and its last good
        result was kept (``status`` is that result's).
    """

    id: str
    line: int
    status: str
    stage: str = ""
    reason: str = ""
    skipped: bool = False
    stale: bool = False


@dataclass
class CampaignReport:
    """The result of :func:`run_campaign`.

    Attributes
    ----------
    campaign : Campaign
    out_dir : Path
    outcomes : list of ShotOutcome
        In table order.
    table : pandas.DataFrame
        The campaign summary table (also written as CSV).
    files : dict
        Campaign-level output name -> path.
    set_aside : list of Path
        Shot folders of ids no longer in the shots table, moved out of
        ``shots/`` by this run (not deleted).
    rewritten : bool
        False when the campaign tables and figures already described the
        shot folders and were left alone.
    """

    campaign: Campaign
    out_dir: Path
    outcomes: list
    table: pd.DataFrame
    files: dict = field(default_factory=dict)
    set_aside: list = field(default_factory=list)
    rewritten: bool = True

    def _ids(self, pred):
        return [o.id for o in self.outcomes if pred(o)]

    @property
    def ok(self) -> list:
        """Ids of valid shots."""
        return self._ids(lambda o: o.status == OK)

    @property
    def invalid(self) -> list:
        """Ids of reduced shots with error flags."""
        return self._ids(lambda o: o.status == INVALID)

    @property
    def failed(self) -> list:
        """Ids of shots without a result."""
        return self._ids(lambda o: o.status == FAILED)

    @property
    def skipped(self) -> list:
        """Ids of shots whose up-to-date outputs were kept."""
        return self._ids(lambda o: o.skipped)

    @property
    def redone(self) -> list:
        """Ids of shots reduced (or attempted) in this run."""
        return self._ids(lambda o: not o.skipped)

    @property
    def stale(self) -> list:
        """Ids of shots whose record cannot be read now; their last good result was kept."""
        return self._ids(lambda o: o.stale)

    @property
    def exit_code(self) -> int:
        """0 when every shot is valid and up to date, else 1."""
        return 0 if all(o.status == OK and not o.stale for o in self.outcomes) else 1

    def lines(self) -> list:
        """What ``shpb batch`` prints at the end of a run."""
        from .reduce import DESIGN_CAUTION

        n = len(self.outcomes)
        text = [f"campaign {self.campaign.name}: {len(self.ok)}/{n} shots valid, {len(self.invalid)} not valid, "
                f"{len(self.failed)} failed ({len(self.skipped)} up to date, kept"
                + (f"; {len(self.stale)} stale: record unreachable, last good result kept" if self.stale else "")
                + ")"]
        if self.set_aside:
            text.append(f"moved aside (no longer in the shots table): {', '.join(p.name for p in self.set_aside)} "
                        f"-> {self.set_aside[0].parent}")
        text.append(f"written to {self.out_dir}" if self.rewritten else
                    f"campaign files in {self.out_dir} already up to date (left as they were)")
        text.append(f"note: {DESIGN_CAUTION}")
        return text


class _StopFlag:
    """SIGINT/SIGTERM -> stop between shots; a second signal stops at once."""

    def __init__(self):
        self.set = False
        self._old = {}

    def __enter__(self):
        if threading.current_thread() is threading.main_thread():
            for sig in (signal.SIGINT, signal.SIGTERM):
                self._old[sig] = signal.signal(sig, self._handler)
        return self

    def _handler(self, signum, frame):
        if self.set:
            raise KeyboardInterrupt
        self.set = True

    def __exit__(self, *exc):
        for sig, old in self._old.items():
            signal.signal(sig, old)
        return False

    def check(self):
        if self.set:
            raise KeyboardInterrupt


def _remove_temporaries(out: Path) -> None:
    """Remove temporary files of an earlier run that was killed outright (SIGKILL, power loss)."""
    if not out.is_dir():
        return
    for p in out.rglob(".*.tmp"):
        try:
            p.unlink()
        except OSError:
            pass


def _stored_key(folder: Path, figures: bool) -> Optional[str]:
    """The key of a complete shot folder, or None when the folder is not complete."""
    need = [ShotResult.CURVES_FILE, ShotResult.SUMMARY_FILE, KEY_FILE] + ([ShotResult.FIGURE_FILE] if figures else [])
    if not all((folder / f).is_file() for f in need):
        return None
    return (folder / KEY_FILE).read_text().strip() or None


def _current_key(shot: Shot, base_dir: Path) -> Optional[str]:
    try:
        hashes = {str(f): sha256_file(f) for f in record_files(shot)}
    except OSError:
        return None  # a record is gone: the shot is redone (and fails there with the reader's message)
    return shot_key(shot, hashes, base_dir)


def stored_key(folder, figures: bool = False) -> Optional[str]:
    """The key of a complete shot folder (``inputs.sha256``), or None when the folder is not complete."""
    return _stored_key(Path(folder), figures)


def current_key(shot: Shot, base_dir) -> Optional[str]:
    """The key a shot's folder would have now (:func:`shot_key` of its records' current bytes); None when a
    record cannot be read."""
    return _current_key(shot, Path(base_dir))


def store_shot(folder, res: dict) -> None:
    """Write one shot's folder from a :func:`reduce_task` result, the key last (what a campaign run does)."""
    _store(Path(folder), res)


def _store(folder: Path, res: dict) -> None:
    """Write one shot's folder: the key goes first (removed) and last (written)."""
    folder.mkdir(parents=True, exist_ok=True)
    key = folder / KEY_FILE
    if key.exists():
        key.unlink()  # from here the folder is "being redone" until the new key is in place
    for name in _SHOT_FILES:
        if name not in res["files"] and name != KEY_FILE and (folder / name).exists():
            (folder / name).unlink()  # e.g. an old figure that no longer matches
    for name in ShotResult.FILES:  # in ShotResult's order: the summary last
        if name in res["files"]:
            atomic_write_bytes(folder / name, res["files"][name])
    atomic_write_text(key, res["key"] + "\n")


def _discard(folder: Path) -> bool:
    """Remove a shot folder of ours whose result no longer stands (the shot now fails); True if anything went."""
    gone = False
    if folder.is_dir():
        if (folder / KEY_FILE).exists():
            (folder / KEY_FILE).unlink()
            gone = True
        for name in _SHOT_FILES:
            if (folder / name).exists():
                (folder / name).unlink()
                gone = True
        try:
            folder.rmdir()
        except OSError:
            pass  # the user put other files there: leave them
    return gone


#: Folder of an output folder where shot folders of ids no longer in the table are moved.
SET_ASIDE_DIR = "set-aside"


def _set_aside(out: Path, ids) -> list:
    """Move the shot folders whose id is no longer in the table to ``set-aside/<date-time>/`` (never delete)."""
    gone = [p for p in shot_folders(out) if p.name not in ids]
    if not gone:
        return []
    dest = out / SET_ASIDE_DIR / time.strftime("%Y%m%d-%H%M%S")
    k = 2
    while dest.exists():
        dest = dest.with_name(f"{dest.name.split('~')[0]}~{k}")
        k += 1
    dest.mkdir(parents=True)
    moved = []
    for p in gone:
        target = dest / p.name
        os.replace(p, target)
        moved.append(target)
    return moved


def _dask_client(scheduler):
    try:
        from dask.distributed import Client
    except ImportError:
        raise InputError("a scheduler address needs Dask: pip install 'dask[distributed]' (or 'shpb[cluster]')",
                         "--scheduler") from None
    if isinstance(scheduler, Client):
        return scheduler, False
    try:
        return Client(str(scheduler), timeout="20s"), True
    except (OSError, TimeoutError, ValueError) as exc:
        raise InputError(f"cannot connect to the Dask scheduler ({type(exc).__name__}: {exc})",
                         str(scheduler)) from None


def _dask_results(tasks, client, figures, base_dir, flow_strains, stop: _StopFlag):
    """Yield task results from an existing Dask cluster (same task function as the local pool)."""
    from dask.distributed import as_completed

    futures = {}
    try:
        for shot in tasks:
            fut = client.submit(reduce_task, shot, figures, str(base_dir), flow_strains, pure=False,
                                key=f"shpb-shot-{shot.name}-{os.urandom(6).hex()}")
            futures[fut] = shot
        for fut in as_completed(list(futures)):
            stop.check()
            shot = futures.pop(fut)
            try:
                yield fut.result()
            except Exception as exc:  # noqa: BLE001 - e.g. a worker lost: recorded, the rest go on
                yield _failed(shot.name, "reduce", f"the Dask task failed: {_one_line(exc)}")
    finally:
        if futures:
            client.cancel(list(futures))


def run_campaign(campaign: Campaign, out_dir=None, jobs: Optional[int] = None, force: bool = False,
                 scheduler: Any = None, figures: bool = True,
                 progress: Optional[Callable[[int, int, ShotOutcome], None]] = None,
                 lock: Optional[FolderLock] = None, remember: bool = True) -> CampaignReport:
    """Reduce every shot of a campaign and write the campaign outputs.

    Parameters
    ----------
    campaign : Campaign
        From :func:`load_campaign`.
    out_dir : str or Path, optional
        Output folder [default: ``campaign.default_out``].
    jobs : int, optional
        Local worker processes [default: ``os.cpu_count()``]; 1 runs in this
        process. Ignored with ``scheduler``.
    force : bool
        Redo every shot, even those whose outputs are up to date.
    scheduler : str or dask.distributed.Client, optional
        Address of a Dask scheduler (``"tcp://10.0.0.5:8786"``) or a client;
        the shots run there instead of a local pool. The workers must see
        the record files at the same paths; they send the outputs back, and
        only this process writes them.
    figures : bool
        Write each shot's figure sheet and the campaign figures.
    progress : callable, optional
        ``progress(done, total, outcome)`` after each shot (skipped ones
        first).
    lock : FolderLock, optional
        The output folder's lock, already held by the caller (``shpb watch``
        holds it while it runs); taken here otherwise.
    remember : bool
        Record the run as complete (``.shpb-run.json``), so that a rerun of
        ``shpb batch`` with the same inputs has nothing to do. False for a
        run of part of a campaign's table (``shpb watch`` before every record
        has come in).

    Returns
    -------
    CampaignReport

    Raises
    ------
    shpb.errors.InputError
        Another run is writing ``out_dir`` (its lock names the holder).
    shpb.errors.Interrupted
        On SIGINT or SIGTERM: the running shots are stopped, the shots
        written so far are complete and a rerun keeps them; the message says
        how many.
    """
    out = Path(out_dir) if out_dir is not None else campaign.default_out
    jobs = max(1, int(jobs or os.cpu_count() or 1))
    client, own_client = _dask_client(scheduler) if scheduler is not None else (None, False)
    try:
        out.mkdir(parents=True, exist_ok=True)
        if lock is not None and lock.held:
            return _run(campaign, out, jobs, force, client, figures, progress, remember)
        with FolderLock(out, f"shpb batch {campaign.path.name}"):
            return _run(campaign, out, jobs, force, client, figures, progress, remember)
    finally:
        if own_client:
            client.close()


def _read_back(folder: Path, flow_strains):
    """The table row and overlay curve of a complete shot folder (raises OSError/ValueError if unreadable)."""
    summary = ShotResult.read_summary(folder)
    cdf = pd.read_csv(folder / ShotResult.CURVES_FILE, usecols=list(_ROW_COLUMNS))
    return summary, shot_row(summary, cdf, flow_strains), _overlay_curve(cdf)


def _error_flags(summary: dict) -> str:
    return "; ".join(f"{f['code']}: {f['message']}" for f in summary.get("flags", []) if f.get("severity") == "error")


def _campaign_files(out: Path) -> list:
    return [out / n for n in (SUMMARY_TABLE, SUMMARY_PARQUET, FAILURES_TABLE, REPEATABILITY_TABLE,
                               *(f"{FIGURES_DIR}/{f}" for f in CAMPAIGN_FIGURES))]


def _run(campaign, out, jobs, force, client, figures, progress, remember=True) -> CampaignReport:
    """:func:`run_campaign` with the folder locked and the scheduler (if any) connected."""
    shots_dir = out / SHOTS_DIR
    base_dir = campaign.base_dir.resolve()
    atomic_write_text(out / MARKER_FILE, "shpb campaign output folder\n")
    _remove_temporaries(out)
    set_aside = _set_aside(out, {r.id for r in campaign.rows})
    changed = bool(set_aside)  # anything in the shot folders that the campaign files do not describe yet

    total = len(campaign.rows)
    outcomes: dict = {}
    rows: dict = {}
    curves: dict = {}
    todo = []
    done = 0

    def report(outcome):
        nonlocal done
        done += 1
        if progress is not None:
            progress(done, total, outcome)

    for row in campaign.rows:
        folder = shots_dir / row.id
        if row.error:
            if not row.id.startswith("line-"):
                changed |= _discard(folder)  # an old result of this id no longer matches its row
            outcomes[row.id] = ShotOutcome(row.id, row.line, FAILED, "setup", row.error)
            report(outcomes[row.id])
            continue
        current = _current_key(row.shot, base_dir)
        kept = _stored_key(folder, figures=False)
        if current is None and kept is not None:
            # the record cannot be read now (an unmounted share): the last good result stays, marked stale
            try:
                summary, rows[row.id], curves[row.id] = _read_back(folder, campaign.flow_strains)
            except (OSError, ValueError):
                todo.append(row)
                continue
            why = _unreachable(row.shot)
            outcomes[row.id] = ShotOutcome(row.id, row.line, OK if summary.get("valid") else INVALID, "read",
                                           f"{why}; the last good result is kept (stale)", skipped=True, stale=True)
            report(outcomes[row.id])
            continue
        stored = None if force else _stored_key(folder, figures)
        if stored is not None and stored == current:
            try:
                summary, rows[row.id], curves[row.id] = _read_back(folder, campaign.flow_strains)
            except (OSError, ValueError):  # InputError is a ValueError
                todo.append(row)  # unreadable despite the key: redo it
                continue
            reason = _error_flags(summary)
            outcomes[row.id] = ShotOutcome(row.id, row.line, OK if summary.get("valid") else INVALID,
                                           "validity" if reason else "", reason, skipped=True)
            report(outcomes[row.id])
            continue
        todo.append(row)

    files = _campaign_files(out)
    if todo or changed:
        # the shot folders are about to change: no campaign file may describe them meanwhile
        forget_state(out)
        for f in files:
            if f.exists():
                f.unlink()
        changed = True

    by_id = {r.id: r for r in todo}
    flow = tuple(campaign.flow_strains)
    done_tables: dict = {}
    figure_files = {name: out / FIGURES_DIR / name for name in CAMPAIGN_FIGURES}

    def tables():
        """Every shot is in: the campaign tables now; the figures to draw (on the warm workers, if any)."""
        nonlocal changed
        ordered = [outcomes[r.id] for r in campaign.rows]
        table = _campaign_table(campaign, ordered, rows)
        written, files_out = _write_tables(out, table, ordered, campaign)
        changed |= written
        done_tables.update(ordered=ordered, table=table, files=files_out)
        if figures and (changed or not all(p.is_file() for p in figure_files.values())):
            changed = True
            return [(name, "figure", (name, campaign, table, curves)) for name in CAMPAIGN_FIGURES]
        return []

    drawn: dict = {}
    with _StopFlag() as stop:
        shots = [r.shot for r in todo]
        if client is not None:
            results = _dask_results(shots, client, figures, str(base_dir), flow, stop)
        else:
            results = _local_results(shots, jobs, figures, str(base_dir), flow, stop, tail=tables)
        try:
            for res in results:
                stop.check()  # after a signal, results still coming in are dropped, not written
                if "figure" in res:
                    if "png" in res:
                        atomic_write_bytes(figure_files[res["figure"]], res["png"])
                        drawn[res["figure"]] = figure_files[res["figure"]]
                    continue
                row = by_id[res["id"]]
                folder = shots_dir / row.id
                if res["status"] == FAILED:
                    _discard(folder)
                else:
                    _store(folder, res)
                    rows[row.id] = res["row"]
                    curves[row.id] = res["curve"]
                outcomes[row.id] = ShotOutcome(row.id, row.line, res["status"], res["stage"], res["reason"])
                report(outcomes[row.id])
        except KeyboardInterrupt:
            kept = sum(1 for o in outcomes.values() if o.status != FAILED)
            new = sum(1 for o in outcomes.values() if o.status != FAILED and not o.skipped)
            raise Interrupted(f"interrupted: {kept} of {total} shots have complete results in {out} ({new} "
                              f"written by this run); the campaign "
                              f"{'figures' if done_tables else 'tables'} were not written; rerun the same "
                              f"command to complete the rest") from None
        finally:
            results.close()

    todo_figures = tables() if not done_tables else \
        [(n, None, None) for n in CAMPAIGN_FIGURES if figures and n not in drawn and (changed or not
                                                                                      figure_files[n].is_file())]
    ordered, table, files_out = done_tables["ordered"], done_tables["table"], done_tables["files"]
    for name, _, _ in todo_figures:  # in this process: one job, Dask, or a figure whose worker died
        atomic_savefig(_DRAWINGS[name](campaign, table, curves), figure_files[name], dpi=110)
    if figures:
        files_out.update({f"{name[:-4]}_png": path for name, path in figure_files.items()})
    result = CampaignReport(campaign=campaign, out_dir=out, outcomes=ordered, table=table, files=files_out,
                            set_aside=set_aside, rewritten=changed)
    if remember and not any(r.error for r in campaign.rows) and not any(o.stage in ("worker", "write")
                                                                         for o in ordered):
        # every input is known and no failure was the machine's: a rerun with the same inputs has nothing to do
        _remember(out, campaign, figures, result)
    return result


def _unreachable(shot: Shot) -> str:
    """Why a shot's record cannot be read now (one line)."""
    for f in record_files(shot):
        try:
            with open(f, "rb"):
                pass
        except OSError as exc:
            return f"record {f}: {exc.strerror or type(exc).__name__}"
    return "record unreachable"


def _input_files(campaign: Campaign) -> list:
    """Every file the campaign's results depend on: campaign file, table, bar sets, calibration files, records."""
    files = {campaign.path, campaign.shots_path}
    for row in campaign.rows:
        if row.shot is None:
            continue
        bs = row.shot.barset
        if bs.source:
            files.add(Path(bs.source).absolute())
            cal = bs.calibration.get("file") if bs.calibration else None
            if cal:
                files.add((Path(bs.source).parent / cal).absolute())
        files.update(Path(f).absolute() for f in record_files(row.shot))
    return sorted(files)


def _remember(out: Path, campaign: Campaign, figures: bool, report: CampaignReport) -> None:
    outputs = [p for p in _campaign_files(out) if p.is_file()] + [out / MARKER_FILE]
    for folder in shot_folders(out):
        outputs += [p for p in folder.iterdir() if p.is_file()]
    lines = [ln.replace(" up to date, kept", " up to date, kept; nothing to do") if i == 0 else ln
             for i, ln in enumerate(report.lines())]
    lines = [ln for ln in lines if not ln.startswith("moved aside")]
    lines = [f"campaign files in {out} already up to date (left as they were)" if ln.startswith("written to")
             else ln for ln in lines]
    write_state(out, version=_package_version(), figures=figures, inputs=input_hashes(_input_files(campaign)),
                outputs=outputs, lines=lines, exit_code=report.exit_code)


# --------------------------------------------------------------------------- campaign outputs
def _campaign_table(campaign: Campaign, outcomes, rows: dict) -> pd.DataFrame:
    flow_cols = [c for e in campaign.flow_strains for c in (_flow_column(e), expanded_name(_flow_column(e)))]
    num_cols = _and_u(["temperature_K", "specimen_length_mm", "specimen_diameter_mm", "mean_strain_rate_per_s",
                       "strain_rate_cv", "peak_stress_MPa", *flow_cols, "yield_strain", "yield_stress_MPa",
                       "valid_fraction_of_loading", "equilibrium_from_strain", "max_strain"])
    records = []
    by_row = {r.id: r for r in campaign.rows}
    for o in outcomes:
        crow = by_row[o.id]
        rec = {"id": o.id, "status": o.status}
        data = rows.get(o.id)
        if data is None:  # failed: what the setup says, NaN for results
            sp = crow.shot.specimen if crow.shot else None
            data = {c: float("nan") for c in num_cols}
            data.update({"material": sp.material if sp else "", "flags": "", "valid": False, "calibration": "",
                         "temperature_K": sp.temperature if sp and sp.temperature is not None else float("nan"),
                         "specimen_length_mm": sp.length * 1e3 if sp else float("nan"),
                         "specimen_diameter_mm": sp.diameter * 1e3 if sp else float("nan")})
            if crow.shot:
                cal = crow.shot.barset.calibration
                data["calibration"] = json.dumps(cal, sort_keys=True, separators=(",", ":"), default=str) \
                    if cal else ""
        rec["material"] = data["material"]
        rec["temperature_K"] = data["temperature_K"]
        for t in campaign.tag_columns:
            rec[t] = crow.tags.get(t, "")
        for c in num_cols:
            if c != "temperature_K":
                rec[c] = data.get(c, float("nan"))
        rec["dominant_input"] = data.get("dominant_input", "")
        rec.update({"flags": data["flags"], "valid": bool(data["valid"]) and o.status == OK,
                    "calibration": data["calibration"], "stage": o.stage, "reason": o.reason,
                    "stale": o.stale, **_record_paths(crow, campaign.base_dir)})
        records.append(rec)
    table = pd.DataFrame.from_records(records)
    table["rate_group"] = rate_groups(table["mean_strain_rate_per_s"].where(table["status"] == OK),
                                      campaign.rate_group_tolerance)
    return table


def _record_paths(row: CampaignRow, base_dir: Path) -> dict:
    """``record_file`` (absolute, resolved) and ``record_file_relative`` (to the campaign file) of a row.

    Two files (one per channel) are joined with ``;``; empty for a row that
    could not be built.
    """
    if row.shot is None:
        return {"record_file": "", "record_file_relative": ""}
    files = [Path(f).resolve() for f in record_files(row.shot)]
    return {"record_file": ";".join(str(f) for f in files),
            "record_file_relative": ";".join(_rel(f, base_dir.resolve()) for f in files)}


def _csv_bytes(df: pd.DataFrame) -> bytes:
    buf = _io.StringIO()
    df.to_csv(buf, index=False, float_format="%.6g")
    return buf.getvalue().encode("utf-8")


def _write_if_changed(path: Path, data: bytes) -> bool:
    """Write ``data`` atomically unless the file already holds exactly it; True when written."""
    try:
        if path.read_bytes() == data:
            return False
    except OSError:
        pass
    atomic_write_bytes(path, data)
    return True


def _write_tables(out: Path, table: pd.DataFrame, outcomes, campaign: Campaign):
    """The campaign tables; files that already hold the same bytes are left alone. Returns (any written, files)."""
    files = {"summary_csv": out / SUMMARY_TABLE, "failures_csv": out / FAILURES_TABLE,
             "repeatability_csv": out / REPEATABILITY_TABLE}
    fails = pd.DataFrame([{"id": o.id, "line": o.line, "status": o.status, "stage": o.stage, "reason": o.reason}
                          for o in outcomes if o.status != OK or o.stale],
                         columns=["id", "line", "status", "stage", "reason"])
    rep = repeatability_table(table, campaign.rate_plot_strain)
    written = False
    for name, df in (("failures_csv", fails), ("repeatability_csv", rep)):
        written |= _write_if_changed(files[name], _csv_bytes(df))
    summary = _csv_bytes(table)
    parquet = out / SUMMARY_PARQUET
    if _write_if_changed(files["summary_csv"], summary) or not parquet.is_file():
        written = True
        buf = _io.BytesIO()
        t = table.copy()
        for c in campaign.tag_columns:
            t[c] = t[c].astype(str)
        try:
            t.to_parquet(buf, index=False)
        except ImportError:
            pass  # no parquet engine (pyarrow) installed: the CSV table only
        else:
            atomic_write_bytes(parquet, buf.getvalue())
    if parquet.is_file():
        files["summary_parquet"] = parquet
    return written, files


def repeatability_table(table: pd.DataFrame, strain: float) -> pd.DataFrame:
    """Spread among repeats: per material and rate group, the flow stress at ``strain``.

    Columns: ``material``, ``rate_group``, ``n``, ``mean_strain_rate_per_s``,
    ``strain`` (= ``strain`` [1]), ``flow_stress_MPa_mean``, ``flow_stress_MPa_std`` (sample standard
    deviation, ddof = 1), ``flow_stress_cv`` (std / mean), ``ids``. Only
    valid shots with a flow stress at ``strain`` count.
    """
    col = _flow_column(strain)
    cols = ["material", "rate_group", "n", "mean_strain_rate_per_s", "strain", "flow_stress_MPa_mean",
            "flow_stress_MPa_std", "flow_stress_cv", "ids"]
    ok = table[(table["status"] == OK) & table[col].notna() & (table["rate_group"] >= 0)]
    out = []
    for (mat, grp), g in ok.groupby(["material", "rate_group"], sort=True):
        vals = g[col].to_numpy(float)
        std = float(np.std(vals, ddof=1)) if vals.size > 1 else float("nan")
        mean = float(np.mean(vals))
        out.append({"material": mat, "rate_group": int(grp), "n": int(vals.size),
                    "mean_strain_rate_per_s": float(g["mean_strain_rate_per_s"].mean()), "strain": strain,
                    "flow_stress_MPa_mean": mean, "flow_stress_MPa_std": std,
                    "flow_stress_cv": std / mean if mean else float("nan"), "ids": ";".join(g["id"])})
    return pd.DataFrame(out, columns=cols)


def _shots_for_figures(table: pd.DataFrame):
    """The successful shots of a campaign table and their materials (sorted; ``[""]`` when there are none)."""
    ok = table[table["status"] == OK]
    return ok, sorted(ok["material"].astype(str).unique()) or [""]


def plot_stress_strain(campaign: Campaign, table: pd.DataFrame, curves: dict):
    """Overlay of the valid parts of the valid shots, one panel per material, coloured by mean strain rate.

    Parameters
    ----------
    campaign : Campaign
        The campaign (its name titles the figure).
    table : DataFrame
        The campaign table (``status``, ``material``, ``id``, ``mean_strain_rate_per_s``).
    curves : dict
        Shot id -> (engineering strain [1], engineering stress [MPa]) of its valid part.

    Returns
    -------
    matplotlib.figure.Figure
        Log colour scale of the mean strain rate (:func:`shpb.style.rate_cmap`,
        the one strain-rate colour map of shpb) with a colour bar; built
        without pyplot.
    """
    from matplotlib import cm, colors
    from matplotlib.figure import Figure  # no pyplot: no global state, safe off the main thread

    from .report import plain_log_axis, wrapped_title
    from .style import rate_cmap

    ok, mats = _shots_for_figures(table)
    rates = ok["mean_strain_rate_per_s"].to_numpy(float)
    finite = rates[np.isfinite(rates) & (rates > 0)]
    lo, hi = (finite.min(), finite.max()) if finite.size else (1.0, 10.0)
    if hi <= lo:
        lo, hi = lo / 1.2, hi * 1.2
    norm = colors.LogNorm(vmin=lo, vmax=hi)
    cmap = rate_cmap()
    ncol = min(len(mats), 3)
    nrow = int(math.ceil(len(mats) / ncol))
    fig = Figure(figsize=(5.0 * ncol + 1.2, 4.0 * nrow + 0.3), constrained_layout=True)
    axes = fig.subplots(nrow, ncol, squeeze=False)
    for ax, mat in zip(axes.flat, mats):
        for _, r in ok[ok["material"].astype(str) == mat].iterrows():
            if r["id"] in curves:
                x, y = curves[r["id"]]
                rate = r["mean_strain_rate_per_s"]
                color = cmap(norm(rate)) if np.isfinite(rate) and rate > 0 else "0.5"
                ax.plot(x, y, color=color, lw=1.2)
        ax.set(xlabel="engineering strain [1]", ylabel="engineering stress [MPa]")
        wrapped_title(ax, mat or "(no material)", fontsize=10, width_inches=4.6)
        ax.grid(alpha=0.3)
    for ax in list(axes.flat)[len(mats):]:
        ax.axis("off")
    sm = cm.ScalarMappable(norm=norm, cmap=cmap)
    bar = fig.colorbar(sm, ax=axes, label="mean strain rate [1/s]")
    plain_log_axis(bar.ax.yaxis)  # 2000, 5000 rather than 2 x 10^3
    wrapped_title(fig, f"{campaign.name}: valid parts of the valid shots")
    return fig


def plot_rate_sensitivity(campaign: Campaign, table: pd.DataFrame):
    """Flow stress at ``campaign.rate_plot_strain`` against mean strain rate (log axis).

    Each repeat is a point, each rate group its mean with +/- one standard
    deviation (:func:`repeatability_table`); one colour and marker per
    material (:data:`shpb.style.SHOT_COLOURS`). The legend sits below the
    panel. Returns a ``matplotlib.figure.Figure`` built without pyplot.
    """
    from matplotlib.figure import Figure  # no pyplot: no global state, safe off the main thread

    from .report import plain_log_axis, wrapped_title
    from .style import shot_style

    ok, mats = _shots_for_figures(table)
    col = _flow_column(campaign.rate_plot_strain)
    rep = repeatability_table(table, campaign.rate_plot_strain)
    fig = Figure(figsize=(7.0, 5.2), constrained_layout=True)
    ax = fig.subplots()
    for i, mat in enumerate(mats):
        st = shot_style(i)
        g = ok[(ok["material"].astype(str) == mat) & ok[col].notna()]
        ax.plot(g["mean_strain_rate_per_s"], g[col], st["marker"], color=st["color"], alpha=0.6, ls="none",
                label=f"{mat or '-'}: shots")
        gr = rep[rep["material"].astype(str) == mat]
        if len(gr):
            ax.errorbar(gr["mean_strain_rate_per_s"], gr["flow_stress_MPa_mean"],
                        yerr=gr["flow_stress_MPa_std"].fillna(0.0), fmt=st["marker"], color=st["color"], mfc="none",
                        ms=9, capsize=4, label=f"{mat or '-'}: group mean ± 1 std")
    ax.set_xscale("log")
    ax.set(xlabel="mean strain rate [1/s]", ylabel=f"flow stress at strain {campaign.rate_plot_strain:g} [MPa]")
    plain_log_axis(ax.xaxis)
    wrapped_title(fig, f"{campaign.name}: rate sensitivity")
    ax.grid(alpha=0.3, which="both")
    if len(ok):
        longest = max(len(t) for t in ax.get_legend_handles_labels()[1])
        fig.legend(loc="outside lower center", ncol=2 if longest <= 48 else 1, fontsize=7)
    return fig


def plot_repeatability(campaign: Campaign, table: pd.DataFrame):
    """Per material and rate group, each repeat's deviation from the group mean flow stress [%].

    One row per group (its material, mean rate and number of shots on the
    left), so long material names have room; bars: +/- one standard
    deviation of the group (:func:`repeatability_table` at
    ``campaign.rate_plot_strain``). Returns a ``matplotlib.figure.Figure``
    built without pyplot.
    """
    import textwrap

    from matplotlib.figure import Figure  # no pyplot: no global state, safe off the main thread

    from .report import wrapped_title
    from .style import shot_style

    ok, mats = _shots_for_figures(table)
    col = _flow_column(campaign.rate_plot_strain)
    rep = repeatability_table(table, campaign.rate_plot_strain)
    fig = Figure(figsize=(7.0, max(3.2, 1.6 + 0.6 * len(rep))), constrained_layout=True)
    ax = fig.subplots()
    labels = []
    for k, (_, gr) in enumerate(rep.iterrows()):
        members = ok[ok["id"].isin(gr["ids"].split(";"))]
        dev = 100 * (members[col].to_numpy(float) / gr["flow_stress_MPa_mean"] - 1)
        st = shot_style(mats.index(str(gr["material"])) if str(gr["material"]) in mats else 0)
        ax.plot(dev, np.full(dev.size, k), st["marker"], color=st["color"], alpha=0.8, ls="none")
        if np.isfinite(gr["flow_stress_cv"]):
            ax.errorbar([0.0], [k], xerr=[100 * gr["flow_stress_cv"]], fmt="|", color="k", capsize=5)
        name = "\n".join(textwrap.wrap(str(gr["material"] or "-"), 24, max_lines=2, placeholder="..."))
        labels.append(f"{name}\n{gr['mean_strain_rate_per_s']:.0f} 1/s, n = {gr['n']}")
    ax.axvline(0.0, color="0.5", lw=0.8)
    ax.set_yticks(range(len(labels)))
    ax.set_yticklabels(labels, fontsize=7)
    ax.set_ylim(-0.6, max(len(labels), 1) - 0.4)
    ax.invert_yaxis()
    ax.set_xlabel(f"deviation from the group mean [%] (flow stress at strain {campaign.rate_plot_strain:g})")
    wrapped_title(fig, f"{campaign.name}: repeatability (bars: ± 1 std of the group)")
    ax.grid(alpha=0.3, axis="x")
    return fig


_DRAWINGS = {"stress_strain.png": lambda c, t, curves: plot_stress_strain(c, t, curves),
             "rate_sensitivity.png": lambda c, t, curves: plot_rate_sensitivity(c, t),
             "repeatability.png": lambda c, t, curves: plot_repeatability(c, t)}


def _figure_task(name: str, campaign: Campaign, table: pd.DataFrame, curves: dict) -> dict:
    """One campaign figure as PNG bytes (runs on a worker, never raising): ``{"figure", "png"}`` or ``"error"``."""
    try:
        return {"figure": name, "png": figure_bytes(_DRAWINGS[name](campaign, table, curves), "png", dpi=110)}
    except Exception as exc:  # noqa: BLE001 - the coordinator draws it again and reports a real error
        return {"figure": name, "error": _one_line(exc)}


def campaign_figures(campaign: Campaign, table: pd.DataFrame, curves: dict, folder) -> dict:
    """Write the overlay figures of a campaign into ``folder`` (PNG, 110 dpi, each atomically).

    ``stress_strain.png`` (:func:`plot_stress_strain`),
    ``rate_sensitivity.png`` (:func:`plot_rate_sensitivity`),
    ``repeatability.png`` (:func:`plot_repeatability`).

    Returns
    -------
    dict
        ``stress_strain_png``, ``rate_sensitivity_png``, ``repeatability_png`` -> Path.
    """
    folder = Path(folder)
    files = {}
    for name, draw in _DRAWINGS.items():  # one figure in memory at a time
        files[f"{name[:-4]}_png"] = folder / name
        atomic_savefig(draw(campaign, table, curves), folder / name, dpi=110)
    return files
