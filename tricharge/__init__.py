"""tricharge: capacitance matrices and surface fields of 3D conductors by boundary elements.

>>> import tricharge
>>> model = tricharge.load("meshes/demo_header.msh", unit="mm")  # doctest: +SKIP
>>> result = tricharge.solve(model)                               # doctest: +SKIP
>>> result.capacitance        # (K, K) farads, Maxwell form          # doctest: +SKIP
"""

__version__ = "0.1.0"

__all__ = ["Model", "Result", "TrichargeError", "load", "solve", "__version__"]

#: Where each public name lives; loaded on first use (PEP 562), so ``import tricharge``
#: or ``import tricharge.bem`` stays light and loads no file readers or plotting.
_PUBLIC = {"Model": "tricharge.model", "Result": "tricharge.bem.results", "TrichargeError": "tricharge.errors",
           "load": "tricharge.io.modelfile", "solve": "tricharge.pipeline"}


def __getattr__(name: str):
    if name in _PUBLIC:
        import importlib

        value = getattr(importlib.import_module(_PUBLIC[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'tricharge' has no attribute {name!r}")


def __dir__():
    return sorted(list(globals()) + list(_PUBLIC))
