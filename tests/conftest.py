"""Test-session set-up shared by every test file.

No checks here, so no outside source: a fresh cache of solved tables per test process, so that no test
reads or fills the user's (common practice: tests do not touch user state).
"""

import atexit
import os
import shutil
import tempfile

# The tests neither read nor fill the user's cache of solved tables (shpb.cache): each test process
# (each xdist worker) gets a fresh one, removed at exit; subprocesses inherit it.
_CACHE = tempfile.mkdtemp(prefix="shpb-test-cache-")
os.environ["SHPB_CACHE_DIR"] = _CACHE
atexit.register(shutil.rmtree, _CACHE, ignore_errors=True)
