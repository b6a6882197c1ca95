"""Sweep files: a family of models described by parameters, checked before anything runs.

A sweep file is TOML (every key our own)::

    model = "demo_package.toml"        # the base model (a model file or a mesh), relative to this file
    unit = "mm"                        # for a mesh base model; a model file has its own
    # builder = "shapes_of_mine:build" # optional: module:function(values) -> a Model or a file path

    [sweep]
    combine = "grid"                   # grid: every combination; together: values side by side;
                                       # random: `samples` draws (tolerance stacks), reproducible by `seed`
    samples = 20
    seed = 7
    method = "auto"                    # solve options: method, tol, levels
    fields = true                      # also solve the applied voltages: peak fields and margins
    withstand = { mold = "20kV/mm" }   # margins, as field --withstand

    [parameters.mold_eps]
    permittivity = "mold"              # a medium's relative permittivity
    values = [3.6, 3.9, 4.2]

    [parameters.sag]
    move = ["wire1", "wire2"]          # surfaces moved rigidly, by the value along `direction`
    direction = [0, 0, -1]             # (in the model's unit)
    from = 0.0
    to = 0.05
    steps = 3

    [parameters.tilt]
    rotate = ["pad1"]                  # degrees about `axis` through `about`
    axis = [0, 0, 1]
    about = [0, 0, 0]
    normal = { mean = 0.0, sd = 2.0 }  # a random parameter (combine = "random")

    [parameters.ring]
    scale = ["ring"]                   # a factor about `about`
    about = [0, 0, 100]
    uniform = { low = 0.9, high = 1.1 }

    [parameters.hv]
    volts = "hv"                       # a conductor's applied voltage
    values = ["10kV", "20kV"]

    [parameters.layout]
    model = ["variant_a.toml", "variant_b.toml"]   # whole model files, one per value

Every mistake is found here, before any variant runs: unknown keys (with the closest
valid one), empty ranges, parts, media or conductors the base model does not have, a
builder that cannot be imported.
"""

from __future__ import annotations

import itertools
import re
from dataclasses import dataclass, field

import numpy as np

from ..errors import TrichargeError

TOP_KEYS = ("model", "unit", "builder", "sweep", "parameters")
SWEEP_KEYS = ("combine", "samples", "seed", "method", "tol", "levels", "fields", "withstand")
CHANGES = ("permittivity", "volts", "move", "rotate", "scale", "model")
PARAMETER_KEYS = CHANGES + ("direction", "axis", "about", "values", "from", "to", "steps", "normal", "uniform")
#: Most variants one sweep may hold (a grid grows fast; our limit, raise it by splitting).
MAX_VARIANTS = 100_000
#: A builder is named as module:function, never evaluated: dotted identifiers only.
BUILDER_PATTERN = re.compile(r"[A-Za-z_][A-Za-z0-9_]*(\.[A-Za-z_][A-Za-z0-9_]*)*:[A-Za-z_][A-Za-z0-9_]*")


class SweepFileError(TrichargeError, ValueError):
    """A sweep file is malformed or names something that does not exist."""


@dataclass(frozen=True)
class Parameter:
    """One swept quantity: its name, what it changes (``change`` one of :data:`CHANGES`, or
    None when only the builder uses it), the targets of that change, the geometry of a
    move/rotation/scaling, and either its ``values`` or a random ``distribution``."""

    name: str
    change: str | None
    targets: tuple = ()
    direction: tuple[float, float, float] = (0.0, 0.0, 0.0)
    axis: tuple[float, float, float] = (0.0, 0.0, 1.0)
    about: tuple[float, float, float] = (0.0, 0.0, 0.0)
    values: tuple = ()
    distribution: tuple[str, float, float] | None = None

    def axis_label(self, length_unit: str) -> str:
        """The parameter's name with what its values are in (``length_unit`` for moves)."""
        what = {"move": length_unit, "rotate": "degrees", "scale": "factor", "volts": "V",
                "permittivity": "relative permittivity"}.get(self.change or "")
        return f"{self.name} ({what})" if what else self.name


@dataclass(frozen=True)
class Sweep:
    """A checked sweep: where it came from, the base model, the parameters, how they
    combine, and the solve options. :meth:`variants` lists the parameter values of every
    variant, in a fixed order."""

    source: str
    folder: str
    base: str | None
    unit: str | None
    builder: str | None
    parameters: tuple[Parameter, ...]
    combine: str = "grid"
    samples: int = 0
    seed: int = 0
    options: dict = field(default_factory=dict)

    def variants(self) -> list[dict]:
        """[{parameter name: value}] for every variant, in a fixed, reproducible order."""
        names = [p.name for p in self.parameters]
        if self.combine == "random":
            rng = np.random.default_rng(self.seed)
            draws = [[_draw(p, rng) for p in self.parameters] for _ in range(self.samples)]
            return [dict(zip(names, row)) for row in draws]
        if self.combine == "together":
            return [dict(zip(names, row)) for row in zip(*(p.values for p in self.parameters))]
        return [dict(zip(names, row)) for row in itertools.product(*(p.values for p in self.parameters))]


def _draw(parameter: Parameter, rng) -> float:
    if parameter.distribution is None:
        return parameter.values[int(rng.integers(len(parameter.values)))]
    kind, a, b = parameter.distribution
    return float(rng.normal(a, b) if kind == "normal" else rng.uniform(a, b))
