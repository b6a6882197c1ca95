"""Reading a sweep file (TOML) into a checked :class:`~tricharge.sweep.spec.Sweep`.

The format is described, with an example, in :mod:`tricharge.sweep.spec`. Every error is
one line naming the file, the key, what arrived and the fix.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from pathlib import Path

import numpy as np

from ..names import printable
from ..sweep.spec import (BUILDER_PATTERN, CHANGES, MAX_VARIANTS, PARAMETER_KEYS, SWEEP_KEYS, TOP_KEYS, Parameter,
                          Sweep, SweepFileError)
from ..units import parse_quantity
from .limits import check_input_file


def _fail(path, text: str) -> SweepFileError:
    return SweepFileError(f"{printable(path)}: {text}")


def _keys(path, where: str, table: dict, allowed) -> None:
    for key in table:
        if key not in allowed:
            close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.5)
            hint = f"did you mean '{close[0]}'?" if close else f"valid keys are {', '.join(allowed)}"
            raise _fail(path, f"unknown key '{where}{printable(key)}'; {hint}")


def _number(path, where: str, value) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _fail(path, f"'{where}' must be a number, got {printable(value)!r:.60}")
    try:
        number = float(value)
    except OverflowError:
        number = math.inf
    if not math.isfinite(number) or abs(number) > 1e15:
        raise _fail(path, f"'{where}' is {printable(value)!r:.60}; give a finite number")
    return number


def _vector(path, where: str, value, default):
    if value is None:
        return default
    if not isinstance(value, list) or len(value) != 3:
        raise _fail(path, f"'{where}' must be three numbers, e.g. [0, 0, 1]")
    out = tuple(_number(path, f"{where}[{k}]", v) for k, v in enumerate(value))
    return out


def _values(path, name: str, spec: dict, change: str | None) -> tuple[tuple, tuple | None]:
    """The parameter's values (or random distribution), checked for its change."""
    where = f"parameters.{name}"
    given = [k for k in ("values", "from", "normal", "uniform") if k in spec]
    if change == "model":
        return tuple(_files(path, where, spec["model"])), None
    if len(given) != 1:
        raise _fail(path, f"'{where}' needs one of values = [...], from/to/steps, normal = {{mean, sd}} or "
                          "uniform = {low, high}")
    kind = given[0]
    if kind == "values":
        values = spec["values"]
        if not isinstance(values, list) or not values:
            raise _fail(path, f"'{where}.values' must be a non-empty list")
        if change == "volts":
            return tuple(parse_quantity(v, "V", what=f"{printable(path)}: '{where}.values'") for v in values), None
        return tuple(_number(path, f"{where}.values", v) for v in values), None
    if kind == "from":
        missing = [k for k in ("to", "steps") if k not in spec]
        if missing:
            raise _fail(path, f"'{where}' has 'from' but no '{missing[0]}'; a range needs from, to and steps")
        steps = spec["steps"]
        if isinstance(steps, bool) or not isinstance(steps, int) or not 1 <= steps <= MAX_VARIANTS:
            raise _fail(path, f"'{where}.steps' must be a whole number from 1 to {MAX_VARIANTS:,}, got "
                              f"{printable(steps)!r:.40}")
        start, stop = _number(path, f"{where}.from", spec["from"]), _number(path, f"{where}.to", spec["to"])
        if steps == 1 and start != stop:
            raise _fail(path, f"'{where}': one step from {start:g} to {stop:g} is ambiguous; give steps >= 2")
        return tuple(float(x) for x in np.linspace(start, stop, steps)), None
    table = spec[kind]
    keys = ("mean", "sd") if kind == "normal" else ("low", "high")
    if not isinstance(table, dict) or sorted(table) != sorted(keys):
        raise _fail(path, f"'{where}.{kind}' must be {{ {keys[0]} = ..., {keys[1]} = ... }}")
    a, b = (_number(path, f"{where}.{kind}.{k}", table[k]) for k in keys)
    if (kind == "normal" and not b >= 0) or (kind == "uniform" and not b > a):
        raise _fail(path, f"'{where}.{kind}' is empty or negative; give sd >= 0, or high > low")
    return (), (kind, a, b)


def _files(path, where: str, value) -> list[str]:
    if not isinstance(value, list) or not value or not all(isinstance(v, str) and v for v in value):
        raise _fail(path, f"'{where}.model' must be a non-empty list of model or mesh files")
    folder = Path(path).parent
    for name in value:
        if not (folder / name).is_file():
            raise _fail(path, f"'{where}.model' names {printable(name)!r}, which does not exist beside the sweep file")
    return value


def _parameter(path, name: str, spec) -> Parameter:
    where = f"parameters.{name}"
    if not isinstance(spec, dict):
        raise _fail(path, f"'{where}' must be a table")
    _keys(path, where + ".", spec, PARAMETER_KEYS)
    changes = [c for c in CHANGES if c in spec]
    if len(changes) > 1:
        raise _fail(path, f"'{where}' changes {' and '.join(changes)}; give each its own parameter")
    change = changes[0] if changes else None
    targets = ()
    if change in ("move", "rotate", "scale"):
        targets = spec[change]
        if isinstance(targets, str):
            targets = [targets]
        if not isinstance(targets, list) or not targets or not all(isinstance(t, str) for t in targets):
            raise _fail(path, f"'{where}.{change}' must name the surfaces it changes, e.g. [\"wire1\"]")
        targets = tuple(targets)
    elif change in ("permittivity", "volts"):
        if not isinstance(spec[change], str):
            raise _fail(path, f"'{where}.{change}' must name a {'medium' if change == 'permittivity' else 'conductor'}")
        targets = (spec[change],)
    direction = _vector(path, f"{where}.direction", spec.get("direction"), (0.0, 0.0, 0.0))
    if change == "move" and not any(direction):
        raise _fail(path, f"'{where}' moves surfaces: give direction = [x, y, z] (not all zero)")
    axis = _vector(path, f"{where}.axis", spec.get("axis"), (0.0, 0.0, 1.0))
    if change == "rotate" and not any(axis):
        raise _fail(path, f"'{where}.axis' must not be zero")
    values, distribution = _values(path, name, spec, change)
    return Parameter(name, change, targets, direction, axis, _vector(path, f"{where}.about", spec.get("about"),
                                                                        (0.0, 0.0, 0.0)), values, distribution)


def _options(path, table: dict) -> dict:
    from ..units import parse_field_strength

    options = {}
    if "method" in table:
        if table["method"] not in ("auto", "dense", "fast"):
            raise _fail(path, f"'sweep.method' must be auto, dense or fast, got {printable(table['method'])!r:.40}")
        options["method"] = table["method"]
    if "tol" in table:
        tol = _number(path, "sweep.tol", table["tol"])
        if not 1e-12 <= tol <= 1e-2:
            raise _fail(path, f"'sweep.tol' must lie between 1e-12 and 1e-2, got {tol:g}")
        options["tol"] = tol
    if "levels" in table:
        if table["levels"] not in (1, 2, 3, 4) or isinstance(table["levels"], bool):
            raise _fail(path, "'sweep.levels' must be 1, 2, 3 or 4")
        options["levels"] = table["levels"]
    if "fields" in table:
        if not isinstance(table["fields"], bool):
            raise _fail(path, "'sweep.fields' must be true or false")
        options["fields"] = table["fields"]
    if "withstand" in table:
        if not isinstance(table["withstand"], dict):
            raise _fail(path, "'sweep.withstand' must be a table medium = strength")
        options["withstand"] = {k: parse_field_strength(v, what=f"{printable(path)}: 'sweep.withstand.{k}'")
                                for k, v in table["withstand"].items()}
    return options


def read_sweep(path) -> Sweep:
    """The sweep in ``path``, checked on its own (see :func:`tricharge.sweep.run.check_sweep`
    for the checks against the base model)."""
    path = check_input_file(Path(path), kind="model")
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise _fail(path, "is not a text file; a sweep file is TOML text") from None
    except (tomllib.TOMLDecodeError, RecursionError) as exc:
        raise _fail(path, f"is not valid TOML ({str(exc)[:120]}); fix the syntax") from None
    _keys(path, "", data, TOP_KEYS)
    table = data.get("sweep", {})
    if not isinstance(table, dict):
        raise _fail(path, "'sweep' must be a table")
    _keys(path, "sweep.", table, SWEEP_KEYS)
    parameters = data.get("parameters")
    if not isinstance(parameters, dict) or not parameters:
        raise _fail(path, "no [parameters.NAME] table; a sweep needs at least one parameter")
    params = tuple(_parameter(path, printable(name), spec) for name, spec in parameters.items())
    builder = data.get("builder")
    if builder is not None and (not isinstance(builder, str) or not BUILDER_PATTERN.fullmatch(builder)):
        raise _fail(path, f"'builder' must be module:function (dotted names only), got {printable(builder)!r:.60}")
    unused = [p.name for p in params if p.change is None and builder is None]
    if unused:
        raise _fail(path, f"parameter '{unused[0]}' changes nothing: give it one of {', '.join(CHANGES)}, or a builder")
    base = data.get("model")
    if base is None and builder is None and not any(p.change == "model" for p in params):
        raise _fail(path, "no 'model' (the base model file) and no builder; add model = \"your_model.toml\"")
    if base is not None and (not isinstance(base, str) or not (path.parent / base).is_file()):
        raise _fail(path, f"'model' names {printable(base)!r:.60}, which does not exist beside the sweep file")
    combine = table.get("combine", "random" if any(p.distribution for p in params) else "grid")
    if combine not in ("grid", "together", "random"):
        raise _fail(path, f"'sweep.combine' must be grid, together or random, got {printable(combine)!r:.40}")
    samples, seed = table.get("samples", 0), table.get("seed", 0)
    for key, value in (("samples", samples), ("seed", seed)):
        if isinstance(value, bool) or not isinstance(value, int) or not 0 <= value <= MAX_VARIANTS:
            raise _fail(path, f"'sweep.{key}' must be a whole number from 0 to {MAX_VARIANTS:,}")
    _check_combination(path, params, combine, samples)
    unit = data.get("unit")
    if unit is not None and not isinstance(unit, str):
        raise _fail(path, "'unit' must be a unit name such as mm")
    return Sweep(str(path), str(path.parent), base, unit, builder, params, combine, samples, seed,
                 _options(path, table))


def _check_combination(path, params, combine: str, samples: int) -> None:
    random = [p.name for p in params if p.distribution]
    if random and combine != "random":
        raise _fail(path, f"parameter '{random[0]}' is random: set sweep.combine = \"random\" and samples")
    if combine == "random" and samples < 1:
        raise _fail(path, "a random sweep needs samples = N (at least 1) and a seed")
    if combine == "together" and len({len(p.values) for p in params}) > 1:
        counts = ", ".join(f"{p.name} {len(p.values)}" for p in params)
        raise _fail(path, f"combine = \"together\" needs the same number of values for every parameter ({counts})")
    count = samples if combine == "random" else (
        len(params[0].values) if combine == "together" else int(np.prod([len(p.values) for p in params])))
    if count > MAX_VARIANTS:
        raise _fail(path, f"the sweep has {count:,} variants, more than {MAX_VARIANTS:,}; split it into several")
