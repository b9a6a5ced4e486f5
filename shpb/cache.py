"""A disk cache for tables that cost time to compute and never change (the dispersion tables).

A table is computed once per user and machine, then read back by every
process, batch worker and notebook (about a millisecond instead of a tenth of
a second and the import of the solvers). The cache only ever saves time: a
missing, unreadable or foreign file is computed again, and a cache that
cannot be written is skipped without a word.

Where
    ``$SHPB_CACHE_DIR`` if set (``SHPB_CACHE_DIR=off`` turns the cache off),
    else ``$XDG_CACHE_HOME/shpb``, else ``~/.cache/shpb`` (on Windows
    ``%LOCALAPPDATA%\\shpb\\cache``).
Layout
    ``<folder>/v1/<kind>-<digest>.npz``: one NumPy archive per table, the
    arrays stored bit for bit. ``v1`` is the layout of this module; ``kind``
    names the table and the version of the code that computes it (its owner
    bumps it when the computation changes); ``digest`` is the SHA-256 of the
    key (the inputs and the shpb version, as JSON), which the archive also
    holds and which is compared on reading.
Concurrent writers
    Each writer writes its own temporary file beside the target and renames
    it over the target (:func:`shpb.io.atomic_write_bytes`): a reader sees
    the old table, the new one or none, never a part of one, and writers of
    the same key write the same bytes.
"""

from __future__ import annotations

import hashlib
import io as _io
import json
import os
import sys
from pathlib import Path
from typing import Callable, Optional

import numpy as np

#: Environment variable that relocates the cache (a folder) or turns it off (``off``).
ENV = "SHPB_CACHE_DIR"
#: Version of the cache layout (the sub-folder).
LAYOUT = "v1"


def folder() -> Optional[Path]:
    """The cache folder (not created here), or None when the cache is off or there is no home folder."""
    value = os.environ.get(ENV)
    if value is not None:
        return None if value.strip().lower() in ("off", "") else Path(value).expanduser()
    if sys.platform == "win32" and os.environ.get("LOCALAPPDATA"):
        return Path(os.environ["LOCALAPPDATA"]) / "shpb" / "cache"
    base = os.environ.get("XDG_CACHE_HOME")
    if base and Path(base).is_absolute():
        return Path(base) / "shpb"
    try:
        return Path.home() / ".cache" / "shpb"
    except RuntimeError:  # no home folder
        return None


def _key_text(key: dict) -> str:
    from . import __version__

    return json.dumps({"shpb": __version__, **key}, sort_keys=True)


def path_of(kind: str, key: dict) -> Optional[Path]:
    """The archive of table ``kind`` with inputs ``key`` (None when the cache is off)."""
    root = folder()
    if root is None:
        return None
    digest = hashlib.sha256(_key_text(key).encode()).hexdigest()[:24]
    return root / LAYOUT / f"{kind}-{digest}.npz"


def arrays(kind: str, key: dict, compute: Callable[[], dict]) -> dict:
    """The arrays of table ``kind`` for inputs ``key``: read from the cache, or computed and stored.

    Parameters
    ----------
    kind : str
        The table and the version of the code computing it, e.g.
        ``"dispersion-curve-1"``.
    key : dict
        The inputs the table depends on (JSON values: numbers, strings).
    compute : callable
        ``compute() -> {name: ndarray}``, numeric arrays; called on a miss.

    Returns
    -------
    dict
        Name -> ndarray, bit for bit what ``compute`` returned.
    """
    path = path_of(kind, key)
    if path is not None:
        found = _read(path, _key_text(key))
        if found is not None:
            return found
    out = {name: np.asarray(value) for name, value in compute().items()}
    if path is not None:
        _write(path, _key_text(key), out)
    return out


def _read(path: Path, key_text: str) -> Optional[dict]:
    try:
        with np.load(path, allow_pickle=False) as z:
            if str(z["__key__"]) != key_text:
                return None
            return {name: z[name] for name in z.files if name != "__key__"}
    except Exception:  # missing, unreadable, not an archive, not ours: compute again
        return None


def _write(path: Path, key_text: str, values: dict) -> None:
    from .io import atomic_write_bytes

    buf = _io.BytesIO()
    np.savez(buf, __key__=np.array(key_text), **values)
    try:
        atomic_write_bytes(path, buf.getvalue())
    except OSError:  # read-only or full disk, no permission: the cache is only a saving
        pass
