"""shpb: split-Hopkinson (Kolsky) pressure bar data reduction.

SI units inside (m, s, Pa, kg/m^3, V). Compression is positive for specimen
stress, strain and strain rate and for incident and transmitted bar strains;
the reflected wave of a compression test is tensile (negative).
"""

__version__ = "0.1.0"

from .errors import AnalysisError, InputError, ShpbError

__all__ = ["AnalysisError", "InputError", "ShpbError", "__version__"]
