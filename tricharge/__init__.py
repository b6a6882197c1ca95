"""tricharge: capacitance matrices and surface fields of 3D conductors by boundary elements.

>>> import tricharge
>>> model = tricharge.load("meshes/demo_header.msh", unit="mm")  # doctest: +SKIP
>>> result = tricharge.solve(model)                               # doctest: +SKIP
>>> result.capacitance        # (K, K) farads, Maxwell form          # doctest: +SKIP
"""

from .bem.capacitance import Result
from .errors import TrichargeError
from .io.modelfile import load
from .model import Model
from .pipeline import solve

__version__ = "0.1.0"

__all__ = ["Model", "Result", "TrichargeError", "load", "solve", "__version__"]
