"""One writer per campaign output folder, and the record of its last complete run.

Standard library only (no numpy, pandas or pint): ``shpb batch`` decides
from here, in a few milliseconds, that a rerun has nothing to do.

* :class:`FolderLock` — ``OUT/.shpb.lock`` (PID, host, process start time,
  start date). A second run on the folder is refused with one line naming
  the holder; a lock whose process is gone (same host: the PID is dead or
  belongs to another process now; another host: older than
  :data:`STALE_AFTER_S`) is stale and taken over.
* :func:`write_state` / :func:`unchanged` — ``OUT/.shpb-run.json``: the
  SHA-256 of every input file of the last complete run (campaign file,
  shots table, bar sets, calibration files, records), the package version,
  the figure switch, and the size and modification time of every output it
  left. When all of these still hold, the outputs already describe the
  inputs: nothing is redrawn or rewritten.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import socket
import time
from pathlib import Path
from typing import Optional

LOCK_FILE = ".shpb.lock"
STATE_FILE = ".shpb-run.json"
#: A file in every campaign output folder: marks its shot folders as campaign results (see ``shpb fit``).
MARKER_FILE = ".shpb-campaign"
#: A lock taken on another host counts as stale after this long [s] (its PID cannot be checked from here).
STALE_AFTER_S = 24 * 3600.0


def slug(text: str) -> str:
    """A folder name from free text: runs of characters other than letters, digits, ``._-`` become ``-``."""
    s = re.sub(r"[^A-Za-z0-9._-]+", "-", text).strip("-.")
    return s or "campaign"


def sha256_file(path) -> str:
    """SHA-256 of a file's content (hex); the same digest as :func:`shpb.io.sha256_file`, without numpy."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


# --------------------------------------------------------------------------- the lock
def _proc_start(pid: int) -> Optional[str]:
    """Start time of a process (clock ticks since boot, Linux ``/proc``), or None where unknown."""
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            stat = fh.read().decode("ascii", "replace")
        return stat[stat.rindex(")") + 2:].split()[19]
    except (OSError, ValueError, IndexError):
        return None


def _alive(pid: int, start: Optional[str]) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        pass  # someone else's live process
    now = _proc_start(pid)
    return start is None or now is None or now == start  # another start time: the PID was reused


class FolderLock:
    """``with FolderLock(out, "shpb batch x.toml"):`` — the only writer of ``out`` while inside.

    Raises
    ------
    shpb.errors.InputError
        Another live run holds the folder (the message names its PID, host
        and start).
    """

    def __init__(self, folder, command: str = "shpb"):
        self.path = Path(folder) / LOCK_FILE
        self.command = command
        self.held = False

    def _mine(self) -> dict:
        pid = os.getpid()
        return {"pid": pid, "host": socket.gethostname(), "start": _proc_start(pid), "time": time.time(),
                "command": self.command}

    def holder(self) -> Optional[dict]:
        """The live holder of the lock, or None when it is free or stale."""
        try:
            info = json.loads(self.path.read_text(encoding="utf-8"))
            pid, host = int(info["pid"]), str(info["host"])
        except FileNotFoundError:
            return None
        except (OSError, ValueError, KeyError, TypeError):
            # unreadable: a lock being written this instant, or debris; debris older than a minute is stale
            try:
                return None if time.time() - self.path.stat().st_mtime > 60 else {"pid": "?", "host": "?",
                                                                                   "time": time.time()}
            except OSError:
                return None
        if host == socket.gethostname():
            return info if _alive(pid, info.get("start")) else None
        return info if time.time() - float(info.get("time", 0)) < STALE_AFTER_S else None

    def acquire(self) -> None:
        from .errors import InputError

        self.path.parent.mkdir(parents=True, exist_ok=True)
        for _ in range(3):
            try:
                fd = os.open(self.path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
            except FileExistsError:
                info = self.holder()
                if info is not None:
                    since = time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(float(info.get("time", 0))))
                    raise InputError(f"another run is writing this folder: {info.get('command', 'shpb')} (pid "
                                     f"{info['pid']} on {info['host']}, since {since}); wait for it to end, or "
                                     f"remove {self.path} if that run is gone", str(self.path.parent)) from None
                try:
                    self.path.unlink()  # stale: its process is gone
                except FileNotFoundError:
                    pass
                continue
            with os.fdopen(fd, "w", encoding="utf-8") as fh:
                json.dump(self._mine(), fh)
            self.held = True
            return
        raise InputError("could not take the folder's lock (another run keeps taking it)", str(self.path))

    def release(self) -> None:
        if self.held:
            self.held = False
            try:
                info = json.loads(self.path.read_text(encoding="utf-8"))
                if int(info.get("pid", -1)) == os.getpid():
                    self.path.unlink()
            except (OSError, ValueError):
                pass

    def __enter__(self):
        self.acquire()
        return self

    def __exit__(self, *exc):
        self.release()
        return False


# --------------------------------------------------------------------------- the last complete run
def _stat(path: Path):
    st = path.stat()
    return [st.st_size, st.st_mtime_ns]


def input_hashes(paths) -> dict:
    """Absolute path -> SHA-256 of its content, or None for a file that cannot be read now."""
    out = {}
    for p in sorted({str(Path(p)) for p in paths}):
        try:
            out[p] = sha256_file(p)
        except OSError:
            out[p] = None
    return out


def write_state(out: Path, *, version: str, figures: bool, inputs: dict, outputs, lines, exit_code: int) -> None:
    """Record a complete run: its inputs' hashes, its outputs' sizes and times, what it printed."""
    from .io import atomic_write_text

    out = Path(out)
    state = {"version": version, "figures": bool(figures), "inputs": inputs,
             "outputs": {Path(p).relative_to(out).as_posix(): _stat(Path(p)) for p in outputs},
             "lines": list(lines), "exit_code": int(exit_code)}
    atomic_write_text(out / STATE_FILE, json.dumps(state, indent=1, sort_keys=True) + "\n")


def read_state(out: Path) -> Optional[dict]:
    try:
        return json.loads((Path(out) / STATE_FILE).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None


def forget_state(out: Path) -> None:
    """The outputs are about to change: the record of the last complete run no longer holds."""
    try:
        (Path(out) / STATE_FILE).unlink()
    except FileNotFoundError:
        pass


def unchanged(out: Path, *, version: str, figures: bool, extra_inputs=()) -> Optional[dict]:
    """The state of the last complete run when its inputs and outputs are all as it left them, else None.

    ``extra_inputs`` (the campaign file, at least) must be among the
    recorded inputs: a run of another campaign into this folder is a change.
    """
    out = Path(out)
    state = read_state(out)
    if not state or state.get("version") != version or state.get("figures") != bool(figures):
        return None
    inputs = state.get("inputs") or {}
    if any(str(Path(p)) not in inputs for p in extra_inputs):
        return None
    if input_hashes(inputs) != inputs:
        return None
    for rel, stat in (state.get("outputs") or {}).items():
        try:
            if _stat(out / rel) != stat:
                return None
        except OSError:
            return None
    return state
