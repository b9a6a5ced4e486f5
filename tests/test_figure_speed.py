"""The shot sheet costs the same whatever the record's length, and saving it draws it once.

No published source: min/max decimation of a long trace (each run of samples
kept as its lowest and highest point) is common practice in digital
oscilloscope displays; the checks below take its definition and the pixels
matplotlib draws as the reference.
"""

from __future__ import annotations

import io
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
from matplotlib.figure import Figure

from shpb.report import MAX_LINE_POINTS, envelope, plot_shot

ROOT = Path(__file__).resolve().parents[1]


def test_envelope_keeps_every_runs_extremes_in_order():
    rng = np.random.default_rng(7)
    n = 100_003
    x = np.arange(n) * 1e-7
    y = np.cumsum(rng.standard_normal(n))
    y[[5, 50_000, n - 1]] = [400.0, -400.0, 300.0]  # lone spikes, one in the short last run
    y[60_000:60_200] = np.nan  # a gap longer than a run
    ex, ey = envelope(x, y, max_points=1000)
    assert ex.size <= 1000 and np.all(np.diff(ex) >= 0)  # in drawing order
    k = -(-n // 500)  # runs of k samples, the last one shorter
    runs = -(-n // k)
    assert ey.size == 2 * runs
    for r in range(runs):  # the definition, run by run
        part = y[r * k:(r + 1) * k]
        kept = ey[2 * r:2 * r + 2]
        if np.all(np.isnan(part)):
            assert np.all(np.isnan(kept))
        else:
            assert sorted(kept) == [np.nanmin(part), np.nanmax(part)]
    assert np.nanmax(ey) == np.nanmax(y) and np.nanmin(ey) == np.nanmin(y) and ey[-1] == 300.0
    assert 400.0 in ey and -400.0 in ey
    short = np.arange(10.0)
    assert envelope(short, short)[1] is short  # a short line is drawn as it is


def _png(x, y):
    fig = Figure(figsize=(5.0, 2.0))
    ax = fig.add_subplot()
    ax.plot(x, y, lw=0.8)
    ax.set_xlim(x[0], x[-1])
    ax.set_ylim(-5, 5)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    from matplotlib.image import imread

    return imread(io.BytesIO(buf.getvalue()), format="png")


def test_envelope_draws_the_pixels_of_the_full_line():
    # a noisy 200,000-sample trace with a burst, 550 pixels wide: the envelope's picture is the full line's
    rng = np.random.default_rng(3)
    t = np.linspace(0.0, 1.0, 200_000)
    y = np.sin(40 * t) + 0.3 * rng.standard_normal(t.size) + 3.0 * (np.abs(t - 0.6) < 0.002)
    full, thin = _png(t, y), _png(*envelope(t, y))
    differ = np.abs(full - thin).max(axis=2) > 0.25
    assert differ.mean() < 0.005  # a few anti-aliased edge pixels at most


@pytest.fixture(scope="module")
def example_result():
    from shpb.reduce import reduce_file

    return reduce_file(ROOT / "configs" / "example_shot.toml")


def test_sheet_of_a_long_record_is_drawn_once_through_envelopes(example_result):
    # the example's traces and curves resampled 50 times finer (400,000 and 160,000 points per line)
    r = example_result
    tr, c = dict(r.traces), r.curves

    def finer(values, n):
        old = np.arange(len(values))
        return np.interp(np.linspace(0, old[-1], n), old, np.asarray(values, dtype=float))

    n_tr, n_c = 50 * tr["time"].size, 50 * len(c)
    for key in ("time", "strain_incident_gauge", "strain_transmitted_gauge"):
        tr[key] = finer(tr[key], n_tr)
    curves = c.__class__({col: finer(c[col], n_c) for col in c.columns})
    curves["valid"] = (curves["valid"] > 0.5).astype(int)
    long = SimpleNamespace(traces=tr, curves=curves, summary=r.summary, flags=r.flags, name=r.name, valid=r.valid)
    fig = plot_shot(long)
    assert max(len(line.get_xdata()) for ax in fig.axes for line in ax.get_lines()) <= MAX_LINE_POINTS
    # saving draws each panel once (a layout engine would draw the sheet twice)
    drawn = []
    for ax in fig.axes:
        ax.draw = (lambda f: lambda renderer: (drawn.append(1), f(renderer)))(ax.draw)
    fig.savefig(io.BytesIO(), format="png", dpi=110)
    assert len(drawn) == len(fig.axes)
