"""Reading records and writing outputs.

Records are delimited text as oscilloscopes and DAQ cards export it
(metadata lines before the data, an optional header row, comma, tab,
semicolon or white-space delimiters) or NumPy ``.npz`` archives. Every output
is written atomically: to a temporary file in the target folder, then renamed.
"""

from __future__ import annotations

import dataclasses
import hashlib
import io as _io
import json
import math
import os
import secrets
from dataclasses import dataclass, field
from pathlib import Path, PurePath

import numpy as np

from .errors import InputError

TEXT_SUFFIXES = {".csv", ".txt", ".dat", ".tsv", ".asc", ".prn"}


@dataclass
class Record:
    """A shot's raw record: a uniform time base and the two bar channels.

    Attributes
    ----------
    time : ndarray
        Record time [s] (uniform).
    dt : float
        Sample interval [s].
    incident, transmitted : ndarray
        Recorded voltages [V].
    files : dict
        File path -> SHA-256 of its content.
    stations : dict
        Further gauge stations' channels [V], by station name: ``incident_2``,
        ``incident_3``, ... for the bar set's ``incident_stations`` in order,
        ``transmitted_2``, ... (empty for a two-channel record).
    """

    time: np.ndarray
    dt: float
    incident: np.ndarray
    transmitted: np.ndarray
    files: dict = field(default_factory=dict)
    stations: dict = field(default_factory=dict)

    @classmethod
    def from_arrays(cls, incident, transmitted, *, dt=None, time=None, stations=None) -> "Record":
        """A record held in memory (no file): the two channels [V] and a sample interval [s] or a time vector [s].

        ``stations`` optionally maps further stations' names (``incident_2``, ...)
        to their channels [V].

        Raises
        ------
        InputError
            Channels of unequal length or too short, non-finite values, or
            a time base that is not uniform and increasing.
        """
        inc = np.asarray(incident, dtype=float).ravel()
        tra = np.asarray(transmitted, dtype=float).ravel()
        if inc.size != tra.size:
            raise InputError(f"the incident channel has {inc.size} samples but the transmitted channel has "
                             f"{tra.size}", "record")
        if inc.size < 16:
            raise InputError(f"only {inc.size} samples: too short to be a bar record", "record")
        for name, x in (("incident", inc), ("transmitted", tra)):
            if not np.all(np.isfinite(x)):
                raise InputError(f"the {name} channel has a non-finite value at sample "
                                 f"{int(np.argmax(~np.isfinite(x)))}", "record")
        extra = {}
        for name, x in (stations or {}).items():
            extra[name] = np.asarray(x, dtype=float).ravel()
            if extra[name].size != inc.size or not np.all(np.isfinite(extra[name])):
                raise InputError(f"the {name} channel has {extra[name].size} samples (the incident channel "
                                 f"{inc.size}) or a non-finite value", "record")
        if (dt is None) == (time is None):
            raise InputError("give either dt (the sample interval) or time (a time vector)", "record")
        if time is not None:
            t = np.asarray(time, dtype=float).ravel()
            if t.size != inc.size:
                raise InputError(f"time has {t.size} samples, channels {inc.size}", "record")
            dt = _uniform_dt(t, "record", "time")
            return cls(time=_time_axis(t[0], dt, t.size), dt=dt, incident=inc, transmitted=tra, stations=extra)
        if not (np.isfinite(dt) and dt > 0):
            raise InputError(f"expected a positive sample interval, got {dt!r}", "record")
        return cls(time=_time_axis(0.0, dt, inc.size), dt=float(dt), incident=inc, transmitted=tra, stations=extra)


# --------------------------------------------------------------------------- hashing
def sha256_file(path, chunk=1 << 20) -> str:
    """SHA-256 of a file's content (hex)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while True:
            b = fh.read(chunk)
            if not b:
                break
            h.update(b)
    return h.hexdigest()


# --------------------------------------------------------------------------- delimited text
def is_number(tok: str) -> bool:
    try:
        float(tok)
        return True
    except ValueError:
        return False


def _split(line: str, delim):
    return [c.strip().strip('"').strip("'") for c in (line.split(delim) if delim else line.split())]


def _sniff(path: Path, n_lines=400):
    """Find the delimiter, the header row (or None) and the first data row of a text record."""
    lines = []
    with open(path, "r", errors="replace") as fh:
        for _ in range(n_lines):
            ln = fh.readline()
            if not ln:
                break
            lines.append(ln.rstrip("\r\n"))
    if not lines:
        raise InputError("the file is empty", str(path))
    for delim in (",", "\t", ";", None):
        # the first row from which the next rows are all numeric with one field count
        for i, ln in enumerate(lines):
            cells = _split(ln, delim)
            if len(cells) < 1 or not all(is_number(c) for c in cells if c != "") or not any(cells):
                continue
            ncol = len(cells)
            if delim is not None and ncol < 2:
                continue
            tail = [_split(x, delim) for x in lines[i : i + 3] if x.strip()]
            if all(len(t) == ncol and all(is_number(c) for c in t) for t in tail):
                header = None
                if i > 0:
                    prev = _split(lines[i - 1], delim)
                    if len(prev) == ncol and not all(is_number(c) for c in prev):
                        header = i - 1
                return delim, header, i, ncol
    raise InputError("no block of numeric rows found (expected delimited numbers, optionally after header lines)",
                     str(path))


def _read_columns(path):
    """Parse a text record: (column names, list of 1-D float arrays, line index of the first data row)."""
    import pandas as pd

    path = Path(path)
    if not path.is_file():
        raise InputError("file not found", str(path))
    delim, header, first, ncol = _sniff(path)
    sep = delim if delim is not None else r"\s+"
    try:
        df = pd.read_csv(path, sep=sep, header=None, skiprows=first, engine="c", dtype=np.float64,
                         skip_blank_lines=True, comment=None, names=list(range(ncol)), index_col=False)
    except (ValueError, pd.errors.ParserError) as exc:
        raise InputError(_bad_cell_message(path, sep, first, ncol) or f"cannot read the data rows ({exc})",
                         str(path)) from None
    if header is not None:
        with open(path, "r", errors="replace") as fh:
            for _ in range(header):
                fh.readline()
            names = _split(fh.readline().rstrip("\r\n"), delim)
    else:
        names = [str(i) for i in range(ncol)]
    # column by column: no interleaved copy of the whole table
    return names, [df[i].to_numpy() for i in range(ncol)], first


def _check_finite(values, name, first, path):
    if not np.isfinite(values).all():
        r = int(np.argmax(~np.isfinite(values)))
        raise InputError(f"column {name!r} has a missing or non-finite value at data row {r + 1} "
                         f"(line {first + r + 1})", str(path))
    return values


def read_table(path):
    """Read a delimited numeric table from a scope/DAQ text export.

    Parameters
    ----------
    path : str or Path
        The text file.

    Returns
    -------
    columns : list of str
        Column names (from the header row, or ``"0"``, ``"1"``, ... if none).
    data : ndarray, shape (n_samples, n_columns)
        The numbers.

    Raises
    ------
    InputError
        Missing file, no numeric block, non-numeric cells or blanks inside the
        data, NaN values.
    """
    names, cols, first = _read_columns(path)
    for name, c in zip(names, cols):
        _check_finite(c, name, first, path)
    return names, np.column_stack(cols)


def _bad_cell_message(path, sep, first, ncol):
    """Locate the first non-numeric cell, for a useful message."""
    import re

    splitter = re.compile(sep) if sep == r"\s+" else None
    with open(path, "r", errors="replace") as fh:
        for lineno, ln in enumerate(fh, start=1):
            if lineno <= first or not ln.strip():
                continue
            cells = splitter.split(ln.strip()) if splitter else ln.rstrip("\r\n").split(sep)
            if len(cells) != ncol:
                return f"line {lineno} has {len(cells)} fields, expected {ncol}"
            for j, c in enumerate(cells):
                if not is_number(c.strip().strip('"')):
                    return f"line {lineno}, column {j + 1}: {c.strip()!r} is not a number"
    return None


def _column_index(names, ncol, column, path):
    if isinstance(column, int) and not isinstance(column, bool):
        if not 0 <= column < ncol:
            raise InputError(f"column index {column} out of range (the file has {ncol} columns, 0-based)", str(path))
        return column
    if column in names:
        return names.index(column)
    raise InputError(f"no column {column!r} (columns: {', '.join(names)})", str(path))


def _load_npz(path, key):
    path = Path(path)
    if not path.is_file():
        raise InputError("file not found", str(path))
    try:
        with np.load(path, allow_pickle=False) as z:
            if str(key) not in z.files:
                raise InputError(f"no array {key!r} (arrays: {', '.join(z.files)})", str(path))
            arr = np.asarray(z[str(key)], dtype=float).ravel()
    except InputError:
        raise
    except Exception as exc:
        raise InputError(f"not a readable .npz archive ({exc.__class__.__name__})", str(path)) from None
    if not np.all(np.isfinite(arr)):
        i = int(np.argmax(~np.isfinite(arr)))
        raise InputError(f"array {key!r} has a non-finite value at sample {i}", str(path))
    return arr


class _Cache:
    """Read each file once even when several channels come from it."""

    def __init__(self):
        self.tables = {}

    def column(self, path: Path, column):
        if path.suffix.lower() == ".npz":
            return _load_npz(path, column)
        if path not in self.tables:
            if path.suffix.lower() not in TEXT_SUFFIXES and path.is_file():
                raise InputError(f"unknown record format {path.suffix!r} (expected .npz or delimited text "
                                 f"{', '.join(sorted(TEXT_SUFFIXES))})", str(path))
            self.tables[path] = _read_columns(path)
        names, cols, first = self.tables[path]
        i = _column_index(names, len(cols), column, path)
        # only the columns used must be finite: an unused dead channel does not matter
        return _check_finite(cols[i], names[i], first, path)


# --------------------------------------------------------------------------- plausibility before allocation
#: Default ceiling on samples per channel (``[record] max_samples`` raises it): about 160 MB a channel read.
MAX_SAMPLES = 20_000_000


def _npz_length(path: Path, key) -> int:
    """Samples of one array of a .npz archive, from its header (nothing loaded)."""
    import zipfile

    with zipfile.ZipFile(path) as z, z.open(f"{key}.npy") as fh:
        version = np.lib.format.read_magic(fh)
        shape = (np.lib.format.read_array_header_1_0(fh) if version == (1, 0)
                 else np.lib.format.read_array_header_2_0(fh))[0]
    return int(np.prod(shape)) if shape else 1


def _text_length(path: Path, sample_bytes: int = 1 << 16) -> int:
    """Rows of a delimited text file, estimated from its size and the length of its first lines."""
    size = path.stat().st_size
    with open(path, "rb") as fh:
        head = fh.read(sample_bytes)
    lines = head.splitlines()[:-1] or head.splitlines()
    body = lines[len(lines) // 2:] or lines  # the second half: data rows, past any header
    per_line = max(1.0, sum(len(x) + 1 for x in body) / max(1, len(body)))
    return int(size / per_line)


def check_record_size(spec) -> None:
    """Refuse, before reading it, a record with more samples per channel than the ceiling.

    The ceiling is ``spec.max_samples`` (the ``[record]`` key ``max_samples``,
    default :data:`MAX_SAMPLES`); text files are measured from their size and
    the length of their first lines, ``.npz`` arrays from their headers.

    Raises
    ------
    InputError
        Naming the file and the key ``record.max_samples``.
    """
    limit = int(getattr(spec, "max_samples", None) or MAX_SAMPLES)
    for ch in _channels(spec).values():
        path = Path(ch.file)
        if not path.is_file():
            continue  # the reader says so
        try:
            n = _npz_length(path, ch.column) if path.suffix.lower() == ".npz" else _text_length(path)
        except (OSError, KeyError, ValueError, EOFError, __import__("zipfile").BadZipFile):
            continue  # unreadable here: the reader gives the precise message
        if n > 1.05 * limit:
            raise InputError(f"about {n:,} samples per channel, over the ceiling of {limit:,} (raise it with "
                             f"record.max_samples if the record is meant to be this long)", str(path))


def check_time_base(record: "Record", shot) -> None:
    """Check a record's time base against the bars before anything sized by it is allocated.

    A unit typo (a time column in seconds read as microseconds, a sample
    interval in ns for us) makes the sample interval wrong by a factor of
    1000 or more. The reduction sizes its arrays by the bars' transit times
    and the pulse length divided by the sample interval, so the interval is
    checked against them first:

    * the shortest of the incident pulse (2 L / c of the striker, or the
      analysis ``window_length``) and the incident wave's round trip from its
      gauge to the specimen (2 d / c0) must span at least 8 samples;
    * the span the reduction works on (that round trip, the transmitted
      gauge's transit and the pulse) must fit within ``record.max_samples``
      samples;
    * the record must last at least a tenth of that shortest time.

    Raises
    ------
    InputError
        One line naming the unit key (``record.time_unit`` for a time column,
        else ``record.sample_interval``) and the times compared.
    """
    spec, bs = shot.record, shot.barset
    if bs is None:
        return
    key = "time_unit" if spec is not None and spec.time is not None else "sample_interval"
    where = f"{shot.source or shot.name}: record.{key}"
    if spec is not None:
        where += f" (record {Path(spec.incident.file).name})"
    dt, n = float(record.dt), int(record.incident.size)
    c_i, c_t = bs.incident.wave_speed, bs.transmitted.wave_speed
    round_trip = 2.0 * bs.incident_gauge.distance / c_i
    pulse = bs.striker.pulse_duration if bs.striker is not None else shot.analysis.window_length
    scales = [("the incident wave's round trip from its gauge to the specimen", round_trip)]
    if pulse:
        scales.append(("the incident pulse", float(pulse)))
    name, shortest = min(scales, key=lambda x: x[1])
    limit = int(getattr(spec, "max_samples", None) or MAX_SAMPLES)
    hint = f"is record.{key} right?"
    if shortest / dt < 8:
        raise InputError(f"a sample interval of {dt:.4g} s gives {shortest / dt:.2g} samples over {name} "
                         f"({shortest * 1e6:.0f} us); a bar record has hundreds; {hint}", where)
    span = round_trip + bs.transmitted_gauge.distance / c_t + bs.incident_gauge.distance / c_i + (pulse or
                                                                                                    round_trip)
    if span / dt > limit:
        raise InputError(f"a sample interval of {dt:.4g} s would take {span / dt:.3g} samples a channel to hold "
                         f"the waves (~{span * 1e6:.0f} us), over the ceiling of {limit:,} (record.max_samples); "
                         f"{hint}", where)
    if n * dt < 0.1 * shortest:
        raise InputError(f"the record lasts {n * dt * 1e6:.3g} us ({n} samples of {dt:.4g} s), far shorter than "
                         f"{name} ({shortest * 1e6:.0f} us); {hint}", where)


def read_record(spec) -> Record:
    """Read the channels named by a :class:`shpb.setup.RecordSpec`.

    Raises
    ------
    InputError
        Unreadable file, unknown column, channels of unequal length,
        non-monotonic or non-uniform time, NaN, more samples than the
        ceiling (:func:`check_record_size`).
    """
    from concurrent.futures import ThreadPoolExecutor

    check_record_size(spec)

    channels = _channels(spec)
    # hash the files on a second thread while they are parsed (hashlib releases the GIL)
    paths = sorted({ch.file for ch in channels.values()}, key=str)
    pool = ThreadPoolExecutor(max_workers=1)
    hashes = {str(p): pool.submit(sha256_file, p) for p in paths if Path(p).is_file()}
    pool.shutdown(wait=False)
    cache = _Cache()
    inc = cache.column(spec.incident.file, spec.incident.column)
    tra = cache.column(spec.transmitted.file, spec.transmitted.column)
    if inc.size != tra.size:
        raise InputError(f"the incident channel has {inc.size} samples but the transmitted channel "
                         f"({spec.transmitted.file}) has {tra.size}", str(spec.incident.file))
    if inc.size < 16:
        raise InputError(f"only {inc.size} samples: too short to be a bar record", str(spec.incident.file))
    stations = {}
    for name, ch in channels.items():
        if name in ("incident", "transmitted"):
            continue
        stations[name] = cache.column(ch.file, ch.column)
        if stations[name].size != inc.size:
            raise InputError(f"the incident channel has {inc.size} samples but the {name} channel ({ch.file}) has "
                             f"{stations[name].size}", str(spec.incident.file))
    if spec.time is not None:
        t = cache.column(spec.incident.file, spec.time)
        if t.size != inc.size:
            raise InputError(f"time has {t.size} samples, channels {inc.size}", str(spec.incident.file))
        dt = _uniform_dt(t, str(spec.incident.file), spec.time, scale=spec.time_unit)
        time = _time_axis(t[0] * spec.time_unit, dt, t.size)
    else:
        dt = spec.sample_interval
        time = _time_axis(0.0, dt, inc.size)
    files = {name: fut.result() for name, fut in hashes.items()}
    return Record(time=time, dt=dt, incident=inc, transmitted=tra, files=files, stations=stations)


def station_name(bar: str, number: int) -> str:
    """The name of a bar's gauge station in a record: ``incident_2`` is the incident bar's second station
    (the bar set's first further one; station 1 is the main gauge, the record's ``incident`` channel)."""
    return f"{bar}_{int(number)}"


def _channels(spec) -> dict:
    """Channel name -> Channel of a record spec: ``incident``, ``transmitted``, then the further stations
    (:func:`station_name`)."""
    out = {"incident": spec.incident, "transmitted": spec.transmitted}
    for bar in ("incident", "transmitted"):
        for k, ch in enumerate(getattr(spec, f"{bar}_stations", ()), start=2):
            out[station_name(bar, k)] = ch
    return out


def _time_axis(t0, dt, n):
    """t0 + dt k for k = 0 .. n-1 [s], built in place (one array of the record's length, no temporaries)."""
    time = np.arange(n, dtype=float)
    time *= dt
    time += t0
    return time


#: Samples per block when a long column is checked piece by piece (8 MB temporaries).
_BLOCK = 1 << 20


def _uniform_dt(t, where, column, scale=1.0):
    """The sample interval of the time column ``t`` × ``scale`` [s]; InputError unless uniform and increasing.

    Checked block by block, so the temporaries stay small whatever the
    record's length; the values compared are those of ``t * scale``.
    """
    dt = (t[-1] * scale - t[0] * scale) / (t.size - 1)
    # one pass decides; the detailed checks run only on failure
    uniform = dt > 0 and all(np.max(np.abs(np.diff(t[i:i + _BLOCK + 1] * scale) - dt)) <= 0.05 * dt
                             for i in range(0, t.size - 1, _BLOCK))
    if not uniform:
        d = np.diff(t * scale)
        if np.any(d <= 0):
            i = int(np.argmax(d <= 0))
            raise InputError(f"time column {column!r} is not increasing at data row {i + 2}", where)
        i = int(np.argmax(np.abs(d - dt)))
        raise InputError(f"time column {column!r} is not uniformly sampled (step {d[i]:.4g} s at row {i + 2}, "
                         f"mean {dt:.4g} s); missing samples?", where)
    return dt


# --------------------------------------------------------------------------- atomic writes
def _create_temporary(path: Path):
    """Open a new temporary file beside ``path``: (file descriptor, its path).

    The file is created with mode 0o666, from which the kernel removes the
    process umask, so the output gets the usual mode of a new file (as
    ``open(path, "w")`` would give) without reading or changing the umask,
    which is process-wide state.
    """
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    while True:
        tmp = path.parent / f".{path.name}.{secrets.token_hex(6)}.tmp"
        try:
            return os.open(tmp, flags, 0o666), tmp
        except FileExistsError:  # another writer drew the same name: draw again
            continue


def atomic_write_bytes(path, data: bytes) -> None:
    """Write ``data`` to ``path`` atomically (temporary file in the same folder, then rename).

    The file gets the mode a newly created file gets (0o666 less the umask).
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = _create_temporary(path)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise


def atomic_write_text(path, text: str) -> None:
    """Write text (UTF-8) atomically."""
    atomic_write_bytes(path, text.encode("utf-8"))


def atomic_write_json(path, obj) -> None:
    """Write JSON atomically (indented, NaN written as null)."""
    atomic_write_text(path, json.dumps(to_plain(obj), indent=2, allow_nan=False) + "\n")


def atomic_write_csv(path, df, float_format="%.6g") -> None:
    """Write a DataFrame as CSV atomically.

    An all-numeric table (the curves of a shot) is formatted by numpy, several
    times faster than pandas' per-value formatting; NaN is written ``nan``.
    """
    import pandas as pd

    numeric = len(df.columns) > 0 and all(pd.api.types.is_numeric_dtype(t) and not pd.api.types.is_bool_dtype(t)
                                          for t in df.dtypes)
    if numeric:
        atomic_write_table(path, df.columns, df.to_numpy(dtype=float), float_format)
        return
    buf = _io.StringIO()
    df.to_csv(buf, index=False, float_format=float_format)
    atomic_write_text(path, buf.getvalue())


def atomic_write_table(path, columns, values, float_format="%.6g") -> None:
    """Write a numeric table (column names, 2-D float array) as CSV atomically, without pandas: a header line,
    then the rows formatted by numpy (NaN written ``nan``); :func:`atomic_write_csv` writes numeric frames so."""
    buf = _io.StringIO()
    buf.write(",".join(str(c) for c in columns) + "\n")
    np.savetxt(buf, values, fmt=float_format, delimiter=",")
    atomic_write_text(path, buf.getvalue())


def figure_bytes(fig, fmt: str = "png", **kwargs) -> bytes:
    """A matplotlib figure rendered to bytes (e.g. on a worker process, for the coordinator to write)."""
    buf = _io.BytesIO()
    fig.savefig(buf, format=fmt, **kwargs)
    return buf.getvalue()


def atomic_savefig(fig, path, **kwargs) -> None:
    """Save a matplotlib figure atomically (format from the suffix)."""
    atomic_write_bytes(path, figure_bytes(fig, Path(path).suffix.lstrip(".") or "png", **kwargs))


def atomic_write_pdf(figures, path) -> None:
    """Write matplotlib figures as the pages of one PDF file, atomically (through matplotlib's PdfPages)."""
    from matplotlib.backends.backend_pdf import PdfPages

    buf = _io.BytesIO()
    with PdfPages(buf) as pdf:
        for fig in figures:
            pdf.savefig(fig)
    atomic_write_bytes(path, buf.getvalue())


_OMIT = object()  # marks a value to_plain leaves out


def to_plain(obj, *, nonfinite="null", none="keep", path=str, skip_fields=()):
    """Plain Python values (dict, list, str, int, float, bool, None) for JSON or TOML output.

    The one conversion of shpb's results into serialisable values: every JSON
    and TOML writer goes through it.

    Parameters
    ----------
    obj : object
        Any nesting of mappings (keys become ``str``), lists, tuples and
        numpy arrays (become lists), numpy scalars (become ``bool``, ``int``,
        ``float``), paths and dataclass instances (become a mapping of their
        fields). Other objects are returned unchanged.
    nonfinite : {"null", "omit", "keep"}
        What a NaN or infinite float becomes: ``"null"`` None (JSON's
        ``null``); ``"omit"`` left out of its mapping or list; ``"keep"``
        the float itself (TOML 1.0 writes ``nan`` and ``inf``).
    none : {"keep", "omit"}
        ``"omit"`` leaves None out of mappings and lists (TOML has no null).
    path : callable
        ``Path -> str``; default ``str``.
    skip_fields : collection of str
        Dataclass fields left out, at any depth.

    Returns
    -------
    object
        The plain value (None if ``obj`` itself is omitted).
    """
    if nonfinite not in ("null", "omit", "keep") or none not in ("keep", "omit"):
        raise ValueError(f"unknown option nonfinite={nonfinite!r} or none={none!r}")

    def plain(o):
        if dataclasses.is_dataclass(o) and not isinstance(o, type):
            o = {f.name: getattr(o, f.name) for f in dataclasses.fields(o) if f.name not in skip_fields}
        if isinstance(o, dict):
            items = ((str(k), plain(v)) for k, v in o.items())
            return {k: v for k, v in items if v is not _OMIT}
        if isinstance(o, np.ndarray):
            o = o.tolist()
        if isinstance(o, (list, tuple)):
            return [v for v in map(plain, o) if v is not _OMIT]
        if o is None:
            return _OMIT if none == "omit" else None
        if isinstance(o, PurePath):
            return path(o)
        if isinstance(o, (bool, np.bool_)):
            return bool(o)
        if isinstance(o, np.integer):
            return int(o)
        if isinstance(o, (float, np.floating)):
            f = float(o)
            if math.isfinite(f) or nonfinite == "keep":
                return f
            return plain(None) if nonfinite == "null" else _OMIT
        return o

    out = plain(obj)
    return None if out is _OMIT else out
