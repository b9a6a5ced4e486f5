"""The colours of every shpb figure: one colour map for strain rate, one palette for shots (and other kinds).

Both are chosen for readers with a colour-vision deficiency:

* :data:`SHOT_COLOURS`, for things told apart by kind (shots of a fit,
  waves, bars, materials): the eight-colour palette of Okabe & Ito (2008)
  without its yellow, which is hard to see on white; past seven items the
  colours repeat with another line style (:func:`shot_style`).
* :data:`RATE_CMAP`, for strain rate on a continuous (log) scale:
  ``cividis`` (Nuñez, Anderton & Renslow 2018), cut at :data:`RATE_CMAP_TOP`
  so that the fastest shots are not drawn in a pale yellow that vanishes on
  white.

Standard library only at import; :func:`rate_cmap` imports matplotlib when
called.

References
----------
Okabe M, Ito K (2008). Color Universal Design (CUD): how to make figures and
presentations that are friendly to colorblind people. J*Fly Data Depository
for Drosophila Researchers.
Nuñez JR, Anderton CR, Renslow RS (2018). Optimizing colormaps with
consideration for color vision deficiency to enable accurate interpretation of
scientific data. PLoS ONE 13(7): e0199239. doi:10.1371/journal.pone.0199239
"""

from __future__ import annotations

#: Okabe-Ito colours (yellow left out), in the order they are given out.
SHOT_COLOURS = ("#0072B2",  # blue
                "#D55E00",  # vermillion
                "#009E73",  # bluish green
                "#CC79A7",  # reddish purple
                "#E69F00",  # orange
                "#56B4E9",  # sky blue
                "#000000")  # black
#: Line styles that tell apart items once the colours repeat.
LINE_STYLES = ("-", "--", ":", "-.")
#: Marker shapes, the same way.
MARKERS = ("o", "s", "^", "D", "v", "P", "X")

#: Named colours of the kinds drawn on a shot's sheet (one per bar, wave and stress form).
INCIDENT = SHOT_COLOURS[0]
REFLECTED = SHOT_COLOURS[1]
TRANSMITTED = SHOT_COLOURS[2]
THREE_WAVE = SHOT_COLOURS[3]
VALID_SHADE = "#009E73"
#: The expanded-uncertainty band (± U) on a shot's sheet.
UNCERTAINTY = SHOT_COLOURS[4]
NEUTRAL = "0.45"

#: The strain-rate colour map and the top of the part of it used.
RATE_CMAP = "cividis"
RATE_CMAP_TOP = 0.85


def shot_style(k: int) -> dict:
    """``color``, ``linestyle`` and ``marker`` of the k-th shot (or item) of a figure (k from 0)."""
    n = len(SHOT_COLOURS)
    return {"color": SHOT_COLOURS[k % n], "linestyle": LINE_STYLES[(k // n) % len(LINE_STYLES)],
            "marker": MARKERS[(k // n) % len(MARKERS)]}


def rate_cmap():
    """The strain-rate colour map (a matplotlib ``Colormap``): :data:`RATE_CMAP` from 0 to :data:`RATE_CMAP_TOP`."""
    import numpy as np
    from matplotlib import colormaps
    from matplotlib.colors import ListedColormap

    return ListedColormap(colormaps[RATE_CMAP](np.linspace(0.0, RATE_CMAP_TOP, 256)), name="shpb-rate")
