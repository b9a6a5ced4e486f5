"""Figures follow one convention: ``plot_*`` returns a ``matplotlib.figure.Figure`` and changes nothing else.

No published source: these are conventions of library code (common practice, and matplotlib's own guidance
that a library should not call ``matplotlib.use`` or pyplot, which change the user's session). Each check
runs in a fresh interpreter with ``MPLBACKEND=svg``, a backend shpb never picks itself, so a switch shows.
"""

import os
import re
import subprocess
import sys
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "shpb"
TESTS = Path(__file__).resolve().parent


def _run(code, cwd):
    env = {**os.environ, "MPLBACKEND": "svg", "PYTHONPATH": str(TESTS)}
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300, cwd=cwd,
                          env=env)
    assert done.returncode == 0, done.stderr
    return done.stdout.split()


def test_importing_every_module_keeps_the_users_backend(tmp_path):
    modules = sorted(f"shpb.{p.stem}" for p in PACKAGE.glob("*.py") if p.stem != "__init__")
    modules += sorted(f"shpb.commands.{p.stem}" for p in (PACKAGE / "commands").glob("*.py"))
    out = _run(f"""
import sys, importlib
for name in {modules!r}:
    importlib.import_module(name)
import matplotlib
print(matplotlib.get_backend(), "matplotlib.pyplot" in sys.modules)
""", tmp_path)
    assert out == ["svg", "False"]


def test_plot_functions_return_figures_and_write_nothing(tmp_path):
    # the working folder must stay empty: no plotting function writes a file
    out = _run("""
import sys
from pathlib import Path
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from synth import elastic_perfectly_plastic, make_shot
from shpb import calibration_files, campaign, dispersion, report
from shpb.reduce import reduce_shot
from shpb.setup import load_shot

work = Path("scratch-inputs")
shot_path, _ = make_shot(work, law=elastic_perfectly_plastic(70e9, 300e6))
result = reduce_shot(load_shot(shot_path))
before = sorted(Path(".").rglob("*"))
table = dispersion.dispersion_table(0.01, 5000.0, 0.29, 2e5, n=50)
figures = [report.plot_shot(result), report.plot_dispersion(table, "bar", 1e9),
           calibration_files.plot_flight([1.0, 2.0, 3.0], [2e-4, 4e-4, 6e-4],
                                         {"wave_speed_m_per_s": 5000.0, "intercept_s": 0.0,
                                          "residuals_s": [0.0, 0.0, 0.0]})]

class Camp:
    name, rate_plot_strain = "c", 0.05

rows = pd.DataFrame({"id": ["a", "b"], "status": [campaign.OK, campaign.OK], "material": ["m", "m"],
                     "mean_strain_rate_per_s": [1000.0, 1010.0], "rate_group": [0, 0],
                     "flow_stress_MPa_at_0.05": [300.0, 303.0]})
line = np.linspace(0.0, 0.1, 5)
curves = {"a": (line, 300.0 + 500.0 * line), "b": (line, 303.0 + 500.0 * line)}
figures += [campaign.plot_stress_strain(Camp, rows, curves), campaign.plot_rate_sensitivity(Camp, rows),
            campaign.plot_repeatability(Camp, rows)]
import matplotlib
print(all(type(f) is Figure for f in figures), len(figures), sorted(Path(".").rglob("*")) == before,
      matplotlib.get_backend(), "matplotlib.pyplot" in sys.modules)
""", tmp_path)
    assert out == ["True", "6", "True", "svg", "False"]


def test_no_module_uses_pyplot_switches_the_backend_or_saves_a_figure_itself():
    # the one writer of figures is shpb.io.atomic_savefig; everything else returns a Figure
    offending = []
    for path in sorted(PACKAGE.rglob("*.py")):
        for no, line in enumerate(path.read_text().splitlines(), start=1):
            code = line.split("#")[0]
            if re.search(r"import\s+matplotlib\.pyplot|from\s+matplotlib\s+import\s+pyplot|matplotlib\.use\(", code) \
                    or (".savefig(" in code and path.name != "io.py"):
                offending.append(f"{path.relative_to(PACKAGE.parent)}:{no}: {line.strip()}")
    assert offending == []
