"""A verdict at the gun: reduce each record as it lands in a folder, with a campaign's settings.

``shpb watch FOLDER --campaign CAMPAIGN.toml`` (:class:`Watcher`) polls the
folder. A record file counts as complete once its size and modification time
have not changed for ``settle`` seconds **and** its content is whole (a text
record ends with a line end; an ``.npz`` archive has its central directory),
or once unchanged for :data:`LONG_SETTLE_S` (a recorder that ends its text
without a line end); a half-written file is never reduced. Names starting
with ``.`` or ``~`` and ending ``.tmp``, ``.part`` (and the like) are never
records: a recorder that writes under a temporary name and renames gives a
complete file at once. Each complete record is then:

1. matched to a shot (:meth:`Watcher.rows_for`): the row of the campaign's
   shots table whose ``record`` (or ``record_incident``/``record_transmitted``)
   names it; otherwise, a shot of its own named after the file (its stem),
   built from the campaign's defaults (``[record]``, ``[specimen]``,
   ``[analysis]``, the default bar set), as if the table had a row with only
   ``id`` and ``record`` (:func:`shpb.campaign.load_campaign` ``extra_records``).
   A file that neither way makes a shot is said loudly, and tried again when
   the campaign file or its table changes (add its row: the table is reread);
2. reduced in this process, which keeps its imports warm
   (:func:`shpb.campaign.reduce_task`): the one-line verdict is printed as
   soon as the reduction ends (a shot that is not valid loudly, with the
   reason in plain words and what to check on the rig), then the figure
   sheet is drawn and the shot's folder written, its key last
   (:func:`shpb.campaign.store_shot`);
3. then the campaign table and figures are brought up to date
   (:func:`shpb.campaign.run_campaign` over the shots whose records are in,
   which finds them all up to date and only rewrites the tables) and the HTML
   report is written (:func:`shpb.html_report.write_report`).

Safe to stop and restart: the watcher holds the output folder's lock while
it runs (a ``shpb batch`` into the same folder is refused meanwhile), every
file is written atomically, and a record whose shot folder already holds its
key (SHA-256 of the record bytes and the setup) is not reduced again. A
record that changes after its verdict is reduced again once it settles.
"""

from __future__ import annotations

import dataclasses
import fnmatch
import json
import os
import sys
import time
import zipfile
from pathlib import Path
from typing import Callable, Optional

from .errors import InputError

#: Names of files being written by other programs (temporary, partial downloads, editor locks): never records.
IGNORED_PREFIXES = (".", "~")
IGNORED_SUFFIXES = (".tmp", ".part", ".partial", ".crdownload", ".lock", ".swp")
#: How long a record must stay unchanged before it counts as complete [s] (with its content whole).
SETTLE_S = 0.5
#: A record whose content never looks whole (a text file without a final line end) counts as complete once
#: unchanged this long [s] (or ten times ``settle``, if longer).
LONG_SETTLE_S = 5.0
#: How often the folder is looked at [s].
POLL_S = 0.1


def content_complete(path) -> bool:
    """Whether a record file's content is whole: a text record ends with a line end, an ``.npz`` archive has
    its central directory (written last). An empty file is not whole."""
    path = Path(path)
    try:
        if path.suffix.lower() == ".npz":
            return zipfile.is_zipfile(path)
        with open(path, "rb") as fh:
            fh.seek(0, os.SEEK_END)
            if fh.tell() == 0:
                return False
            fh.seek(-1, os.SEEK_END)
            return fh.read(1) in (b"\n", b"\r")
    except OSError:
        return False


@dataclasses.dataclass
class _Seen:
    """What the watcher knows of one file: its last size and time, since when unchanged, and what it did."""

    size: int
    mtime_ns: int
    since: float
    handled: Optional[tuple] = None  # (size, mtime_ns) it was handled at
    unmatched: Optional[tuple] = None  # (size, mtime_ns, campaign signature) at which no shot could be made


class Watcher:
    """Watch ``folder`` and reduce each complete record with the campaign's settings (see the module doc).

    Parameters
    ----------
    folder : path
        The folder the recorder writes into (its top level is watched).
    campaign : path
        The campaign file (TOML): the shots table, default bar set and
        defaults. Its table may have no rows (every record then takes the
        defaults).
    out : path, optional
        The campaign output folder [default: the campaign's, as ``shpb batch``].
    pattern : str
        Names of the files to watch (shell pattern, e.g. ``shot-*.csv``)
        [default: every readable record: delimited text or ``.npz``].
    settle : float
        Seconds a record must stay unchanged (and whole) before it is reduced.
    poll : float
        Seconds between looks at the folder.
    report : bool
        Write the HTML report after each update.
    figures : bool
        Draw each shot's figure sheet and the campaign figures.
    echo : callable
        Where lines go [default: print to stdout, flushed].
    """

    def __init__(self, folder, campaign, out=None, pattern: str = "*", settle: float = SETTLE_S,
                 poll: float = POLL_S, report: bool = True, figures: bool = True,
                 echo: Optional[Callable[[str], None]] = None):
        from .campaign import load_campaign

        self.folder = Path(folder)
        if not self.folder.is_dir():
            raise InputError("not a folder (the folder to watch)", str(folder))
        self.campaign_path = Path(campaign)
        self.base = load_campaign(self.campaign_path, allow_empty=True)
        self.out = Path(out) if out is not None else self.base.default_out
        self.pattern, self.settle, self.poll_s = pattern, float(settle), float(poll)
        self.report, self.figures = report, figures
        self.echo = echo or _print
        self.loud = hasattr(sys.stdout, "isatty") and sys.stdout.isatty() and echo is None
        self.seen: dict = {}
        self.defaulted: set = set()  # files reduced as shots of their own (no row)
        self.verdicts: dict = {}  # shot id -> valid (this session)
        self.lock = None
        self._signature = self._campaign_signature()

    # ---- the campaign and its inputs
    def _campaign_signature(self):
        files = [self.campaign_path, self.base.shots_path]
        for row in self.base.rows:
            if row.shot is not None and row.shot.barset.source:
                files.append(Path(row.shot.barset.source))
        sig = []
        for f in sorted({Path(f).absolute() for f in files}):
            try:
                st = f.stat()
                sig.append((str(f), st.st_size, st.st_mtime_ns))
            except OSError:
                sig.append((str(f), None, None))
        return tuple(sig)

    def _reload_if_changed(self) -> None:
        from .campaign import load_campaign

        sig = self._campaign_signature()
        if sig != self._signature:
            try:
                self.base = load_campaign(self.campaign_path, allow_empty=True)
            except InputError as exc:
                self.echo(f"{_now()} the campaign cannot be read now ({exc}); keeping the one read before")
            self._signature = self._campaign_signature()

    def _inputs(self) -> set:
        """The campaign's own files (never records)."""
        return {p for p, _, _ in self._signature}

    # ---- the folder
    def _candidates(self):
        from .io import TEXT_SUFFIXES

        out = self.out.absolute()
        inputs = self._inputs()
        try:
            entries = list(os.scandir(self.folder))
        except OSError:
            return []
        files = []
        for e in entries:
            name = e.name
            if name.startswith(IGNORED_PREFIXES) or name.lower().endswith(IGNORED_SUFFIXES):
                continue
            if Path(name).suffix.lower() not in TEXT_SUFFIXES | {".npz"} or not fnmatch.fnmatch(name, self.pattern):
                continue
            path = Path(e.path).absolute()
            if str(path) in inputs or out in path.parents:
                continue
            try:
                if e.is_file():
                    files.append((path, e.stat()))
            except OSError:
                continue
        return files

    def ready(self) -> list:
        """Records that are complete (unchanged for ``settle`` seconds, content whole) and not handled as they are."""
        now = time.monotonic()
        ready = []
        present = set()
        for path, st in self._candidates():
            present.add(path)
            s = self.seen.get(path)
            if s is None or (s.size, s.mtime_ns) != (st.st_size, st.st_mtime_ns):
                handled = s.handled if s else None
                self.seen[path] = s = _Seen(st.st_size, st.st_mtime_ns, now, handled)
            if s.handled == (s.size, s.mtime_ns) or now - s.since < self.settle:
                continue
            if s.unmatched is not None and s.unmatched == (s.size, s.mtime_ns, self._signature):
                continue
            if content_complete(path) or now - s.since >= max(LONG_SETTLE_S, 10 * self.settle):
                ready.append(path)
        for gone in set(self.seen) - present:
            del self.seen[gone]
        return sorted(ready, key=lambda p: (self.seen[p].since, p.name))

    def _settled(self, path: Path) -> bool:
        s = self.seen.get(path.absolute())
        return s is not None and s.handled == (s.size, s.mtime_ns)

    # ---- files to shots
    def rows_for(self, paths):
        """The campaign (with rows of their own for records no row names) and, per path, its rows (or an
        explanation string when no shot can be made of it)."""
        from .campaign import load_campaign, record_files

        named = {}
        for row in self.base.rows:
            if row.shot is not None:
                for f in record_files(row.shot):
                    named.setdefault(Path(f).resolve(), []).append(row)
        fresh = [p for p in paths if p.resolve() not in named]
        extras = sorted(self.defaulted | set(fresh))
        camp = self.base
        if extras:
            try:
                camp = load_campaign(self.campaign_path, extra_records=extras, allow_empty=True)
            except InputError as exc:
                return self.base, {p: (named.get(p.resolve()) or str(exc)) for p in paths}
        mapping = {}
        for p in paths:
            if p.resolve() in named:
                mapping[p] = named[p.resolve()]
                continue
            own = [r for r in camp.rows if r.line == 0 and r.id == p.stem]
            if own and own[0].shot is not None:
                mapping[p] = own
            else:
                why = own[0].error if own else "no row of the shots table names it"
                mapping[p] = f"no row of {self.base.shots_path.name} names it, and the campaign's defaults do not " \
                             f"make a shot of it ({why}); add its row (the table is reread when it changes)"
        return camp, mapping

    # ---- one pass
    def step(self) -> int:
        """Look at the folder once; reduce what is complete; bring the campaign files up to date. Returns the
        number of shots reduced."""
        self._reload_if_changed()
        paths = self.ready()
        if not paths:
            return 0
        camp, mapping = self.rows_for(paths)
        reduced = 0
        for path in paths:
            rows = mapping[path]
            s = self.seen[path]
            if isinstance(rows, str):
                s.unmatched = (s.size, s.mtime_ns, self._signature)
                self._loud(f"{_now()} {path.name}: NOT REDUCED: {rows}")
                continue
            for row in rows:
                reduced += self._reduce(camp, row, path, set(paths))
            s.handled = (s.size, s.mtime_ns)
            if rows and rows[0].line == 0:
                self.defaulted.add(path)
        self._update(camp)
        return reduced

    def _reduce(self, camp, row, path: Path, batch: set) -> int:
        from .campaign import SHOTS_DIR, current_key, reduce_task, record_files, store_shot, stored_key
        from .plain_words import uncertainty_lines
        from .reduce import ShotResult

        if row.error or row.shot is None:
            self._loud(f"{_now()} shot {row.id} ({path.name}): NOT REDUCED: {row.error}")
            return 0
        others = [Path(f).absolute() for f in record_files(row.shot) if Path(f).resolve() != path.resolve()]
        pending = [f for f in others if not f.is_file() or (f.parent == self.folder.absolute()
                                                             and not self._settled(f) and f not in batch)]
        if pending:
            self.echo(f"{_now()} shot {row.id}: waiting for {', '.join(p.name for p in pending)}")
            return 0
        folder = self.out / SHOTS_DIR / row.id
        base_dir = camp.base_dir.resolve()
        key = current_key(row.shot, base_dir)
        if key is not None and stored_key(folder, self.figures) == key:
            self.echo(f"{_now()} shot {row.id}: up to date ({path.name} reduced before)")
            return 0
        last_byte = max(Path(f).stat().st_mtime for f in record_files(row.shot))
        where = f"row of shots table line {row.line}" if row.line else "no row: the campaign's defaults"
        self.echo(f"{_now()} {path.name} complete: reducing it as shot {row.id} ({where})")
        flow_strain = camp.rate_plot_strain

        def announce(result):
            self._verdict(row.id, result, flow_strain, time.time() - last_byte, defaults=not row.line)

        res = reduce_task(row.shot, self.figures, str(base_dir), tuple(camp.flow_strains), announce=announce)
        if res["status"] == "failed":
            self._loud(f"{_now()} shot {row.id}: FAILED ({res['stage']}): {res['reason']}")
            self.verdicts[row.id] = False
            return 1
        self.out.mkdir(parents=True, exist_ok=True)
        store_shot(folder, res)
        # the verdict came first (announce); the uncertainty, when the campaign asks for it, follows
        for line in uncertainty_lines(json.loads(res["files"][ShotResult.SUMMARY_FILE])):
            self.echo(line)
        if self.figures:
            self.echo(f"  figure sheet: {folder / 'shot.png'}")
        return 1

    def _verdict(self, shot_id, result, flow_strain, latency, defaults=False) -> None:
        from .campaign import flow_stress_at
        from .plain_words import shot_lines

        c = result.curves
        flow = flow_stress_at(c["strain"], c["stress_MPa"], c["valid"].to_numpy(bool), flow_strain)
        lines = shot_lines(shot_id, result.summary, c, flow=(flow_strain, flow))
        # how soon after the record's last write (not said for a record that was there before the watcher)
        lines[0] = f"{_now()} {lines[0]}" + (f"   [{latency:.1f} s after the record's last write]" if latency < 60
                                             else "")
        if defaults:
            sp = result.summary["inputs"]["specimen"]
            lines.append(f"  note: no row names this record: the campaign's default specimen was used "
                         f"({sp['length_m'] * 1e3:.2f} mm long, {sp['diameter_m'] * 1e3:.2f} mm across); add its "
                         f"row with the measured size")
        self.verdicts[shot_id] = result.valid
        if result.valid:
            for line in lines:
                self.echo(line)
        else:
            self._loud("\n".join([f"{'!' * 12} NOT VALID: shot {shot_id} {'!' * 12}"] + lines))

    def _loud(self, text: str) -> None:
        if self.loud:
            text = f"\a\033[1;31m{text}\033[0m"
        self.echo(text)

    def _update(self, camp) -> None:
        """The campaign table, figures and report for the shots whose records are in."""
        from .campaign import SHOTS_DIR, record_files, run_campaign, stored_key

        rows = []
        for row in camp.rows:
            if row.shot is None:
                continue
            files = [Path(f).absolute() for f in record_files(row.shot)]
            watched = [f for f in files if f.parent == self.folder.absolute()]
            if any(not self._settled(f) for f in watched if f.is_file()):
                continue  # a record still coming in (or not yet handled): never read by the table run
            if all(f.is_file() for f in files) or stored_key(self.out / SHOTS_DIR / row.id) is not None:
                rows.append(row)
        if not rows:
            return
        whole = len(rows) == len(camp.rows) and not any(r.line == 0 for r in rows)
        part = dataclasses.replace(camp, rows=tuple(rows))
        run_campaign(part, self.out, jobs=1, figures=self.figures, lock=self.lock, remember=whole)
        msg = f"  campaign table updated: {self.out / 'campaign_summary.csv'} ({len(rows)} shot" \
              f"{'s' if len(rows) != 1 else ''})"
        if self.report:
            from .html_report import write_report

            msg += f"; report {write_report(self.out)}"
        self.echo(msg)

    # ---- the loop
    def warm_up(self) -> None:
        """Import and draw once, so that the first verdict costs only its reduction and figure."""
        from matplotlib.figure import Figure

        from . import campaign, html_report, kolsky, plain_words, pulses, reduce, report, validity  # noqa: F401
        from .io import figure_bytes

        fig = Figure(figsize=(2, 1))
        ax = fig.add_subplot()
        ax.plot([0, 1], [0, 1], label="µε")
        ax.legend()
        ax.set_title("warm-up")
        figure_bytes(fig, "png", dpi=50)

    def run(self, once: bool = False, should_stop: Optional[Callable[[], bool]] = None) -> None:
        """Watch until interrupted (Ctrl-C, SIGTERM) or ``should_stop()``; ``once``: one pass over what is in the
        folder now (files still being written are waited for)."""
        from .campaign import MARKER_FILE
        from .io import atomic_write_text
        from .runstate import FolderLock

        self.out.mkdir(parents=True, exist_ok=True)
        with FolderLock(self.out, f"shpb watch {self.folder}") as lock:
            self.lock = lock
            atomic_write_text(self.out / MARKER_FILE, "shpb campaign output folder\n")
            self.warm_up()
            self.echo(f"{_now()} watching {self.folder} for {self.pattern} (campaign {self.base.name}; results in "
                      f"{self.out}); a record counts once unchanged for {self.settle:g} s; Ctrl-C stops")
            try:
                while True:
                    self.step()
                    if once and not self._waiting():
                        return
                    if should_stop is not None and should_stop():
                        return
                    time.sleep(self.poll_s)
            except KeyboardInterrupt:
                from .errors import Interrupted

                n = len(self.verdicts)
                raise Interrupted(f"interrupted: stopped watching {self.folder} after {n} shot{'s' if n != 1 else ''}"
                                  f" reduced; every result written is whole; run the same command to go on "
                                  f"(records already reduced are not reduced again)") from None
            finally:
                self.lock = None

    def _waiting(self) -> bool:
        """Files seen but not yet handled (still being written, or settling)."""
        return any(s.handled != (s.size, s.mtime_ns) and s.unmatched is None for s in self.seen.values())


def _now() -> str:
    return time.strftime("%H:%M:%S")


def _print(text: str) -> None:
    print(text, flush=True)
