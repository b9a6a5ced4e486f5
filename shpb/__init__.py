"""shpb: split-Hopkinson (Kolsky) pressure bar data reduction.

SI units inside (m, s, Pa, kg/m^3, V). Compression is positive for specimen
stress, strain and strain rate and for incident and transmitted bar strains;
the reflected wave of a compression test is tensile (negative).

The main entry points are importable from the package itself::

    from shpb import load_shot, reduce_shot
    result = reduce_shot(load_shot("configs/example_shot.toml"))
    result.plot()

They are loaded on first use, so ``import shpb`` (and the ``shpb`` command's
start-up) stays light.
"""

from __future__ import annotations

from importlib import import_module
from typing import TYPE_CHECKING

__version__ = "0.1.0"

from .errors import AnalysisError, InputError, ShpbError

#: Public name -> module that defines it.
_LAZY = {
    "load_shot": "setup", "load_barset": "setup", "Shot": "setup", "BarSet": "setup", "Bar": "setup",
    "Gauge": "setup", "Material": "setup", "Specimen": "setup", "Striker": "setup",
    "AnalysisOptions": "setup", "RecordSpec": "setup", "Channel": "setup",
    "reduce_shot": "reduce", "ShotResult": "reduce",
    "Record": "io", "read_record": "io",
    "propagate": "dispersion", "phase_velocity": "dispersion",
    "MODELS": "models", "get_model": "models", "evaluate": "models",
    "fit_curves": "fit", "load_curves": "fit",
    "load_campaign": "campaign", "run_campaign": "campaign",
}

__all__ = ["AnalysisError", "InputError", "ShpbError", "__version__", *_LAZY]


def __getattr__(name):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'shpb' has no attribute {name!r}")
    value = getattr(import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_LAZY))


if TYPE_CHECKING:  # pragma: no cover - for type checkers and editors
    from .campaign import load_campaign, run_campaign
    from .dispersion import phase_velocity, propagate
    from .fit import fit_curves, load_curves
    from .io import Record, read_record
    from .models import MODELS, evaluate, get_model
    from .reduce import ShotResult, reduce_shot
    from .setup import (AnalysisOptions, Bar, BarSet, Channel, Gauge, Material, RecordSpec, Shot, Specimen,
                        Striker, load_barset, load_shot)
