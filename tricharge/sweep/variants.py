"""Making the model of one variant: the base model (or a builder's, or a listed file) with
each parameter's change applied; and checking a sweep against its base model."""

from __future__ import annotations

import dataclasses
import importlib
from pathlib import Path

import numpy as np

from ..names import printable
from .spec import Sweep, SweepFileError


def _builder(sweep: Sweep):
    """The builder function named ``module:function`` (imported, never evaluated)."""
    import sys

    module, function = sweep.builder.split(":")
    if sweep.folder not in sys.path:
        sys.path.insert(0, sweep.folder)  # a module beside the sweep file
    try:
        found = getattr(importlib.import_module(module), function)
    except ImportError as exc:
        raise SweepFileError(f"{printable(sweep.source)}: builder {printable(sweep.builder)!r} cannot be imported "
                             f"({printable(exc)}); put {module}.py beside the sweep file or on PYTHONPATH") from None
    except AttributeError:
        raise SweepFileError(f"{printable(sweep.source)}: module {module!r} has no function {function!r} "
                             "(the builder)") from None
    if not callable(found):
        raise SweepFileError(f"{printable(sweep.source)}: builder {printable(sweep.builder)!r} is not a function")
    return found


def _load(sweep: Sweep, name, unit=None):
    from ..io.modelfile import load

    return load(Path(sweep.folder) / name, unit=unit or sweep.unit)


def base_model(sweep: Sweep, values: dict):
    """The model a variant starts from: the builder's, a listed model file's, or the base."""
    from ..model import Model

    if sweep.builder is not None:
        built = _builder(sweep)(dict(values))
        if isinstance(built, Model):
            return built
        if isinstance(built, (str, Path)):
            return _load(sweep, built)
        raise SweepFileError(f"{printable(sweep.source)}: builder {printable(sweep.builder)!r} returned "
                             f"{type(built).__name__}; it must return a tricharge Model or a file path")
    chosen = [values[p.name] for p in sweep.parameters if p.change == "model"]
    return _load(sweep, chosen[0] if chosen else sweep.base)


def _rotation(axis, degrees: float) -> np.ndarray:
    k = np.asarray(axis, dtype=float) / np.linalg.norm(axis)
    a = np.deg2rad(degrees)
    cross = np.array([[0, -k[2], k[1]], [k[2], 0, -k[0]], [-k[1], k[0], 0]])
    return np.eye(3) + np.sin(a) * cross + (1 - np.cos(a)) * cross @ cross


def apply(model, sweep: Sweep, values: dict):
    """``model`` with every parameter's change for ``values`` (lengths in the model's unit)."""
    from ..units import metres_per

    scale = metres_per(model.unit)
    vertices, media, conductors = model.vertices.copy(), list(model.media), list(model.conductors)
    for p in sweep.parameters:
        value = values[p.name]
        if p.change == "permittivity":
            media = [dataclasses.replace(m, permittivity=float(value)) if m.name == p.targets[0] else m for m in media]
        elif p.change == "volts":
            conductors = [dataclasses.replace(c, voltage=float(value)) if c.name == p.targets[0] else c
                          for c in conductors]
        elif p.change in ("move", "rotate", "scale"):
            surfaces = [model.surfaces.index(s) for s in part_surfaces(model, p.targets)]
            moving = np.unique(model.triangles[np.isin(model.surface_index, surfaces)])
            about = np.asarray(p.about) * scale
            if p.change == "move":
                direction = np.asarray(p.direction) / np.linalg.norm(p.direction)
                vertices[moving] += float(value) * scale * direction
            elif p.change == "rotate":
                vertices[moving] = (vertices[moving] - about) @ _rotation(p.axis, float(value)).T + about
            else:
                vertices[moving] = about + float(value) * (vertices[moving] - about)
    return dataclasses.replace(model, vertices=vertices, media=tuple(media), conductors=tuple(conductors))


def part_surfaces(model, targets) -> list[str]:
    """The surfaces of the named parts: a surface stands for itself, a conductor for all
    of its surfaces."""
    by_conductor = {c.name: c.surfaces for c in model.conductors}
    out = []
    for target in targets:
        out += [target] if target in model.surfaces else list(by_conductor.get(target, ()))
    return list(dict.fromkeys(out))


def check_sweep(sweep: Sweep) -> None:
    """Everything that can be checked before any variant runs: the builder imports, the
    base model loads, and every part, medium and conductor a parameter names exists in
    it. Raises SweepFileError (or the model's own error) naming the first problem."""
    if sweep.builder is not None:
        _builder(sweep)
        return  # the builder's models exist only per variant
    first = {p.name: (p.values[0] if p.values else 0.0) for p in sweep.parameters}
    model = base_model(sweep, first)
    for p in sweep.parameters:
        parts = list(dict.fromkeys([*model.surfaces, *model.conductor_names]))
        known = {"permittivity": [m.name for m in model.media], "volts": list(model.conductor_names),
                 "move": parts, "rotate": parts, "scale": parts}
        names = known.get(p.change)
        if names is None:
            continue
        for target in p.targets:
            if target not in names:
                what = {"permittivity": "medium", "volts": "conductor"}.get(p.change, "part")
                raise SweepFileError(f"{printable(sweep.source)}: parameter '{p.name}' names {what} "
                                     f"{printable(target)!r}, which the model does not have; it has "
                                     f"{printable(', '.join(names)) or 'none'}")
        if p.change == "scale" and any(v <= 0 for v in p.values):
            raise SweepFileError(f"{printable(sweep.source)}: parameter '{p.name}' scales by a factor <= 0")
