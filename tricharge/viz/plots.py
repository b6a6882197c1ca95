"""Charts with matplotlib (imported inside the functions; Agg backend, no display)."""

from __future__ import annotations

import io

import numpy as np

from ..names import chart_label
from ..units import prefix_for


def _pyplot():
    from ..extras import require

    require("viz", "charts")
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _png(figure) -> bytes:
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=110, bbox_inches="tight")
    return buffer.getvalue()


def matrix_heatmap(names, mutual, *, reference: str = "infinity") -> bytes:
    """PNG bytes: the mutual-form matrix as an annotated heat map, one engineering prefix
    for all cells; the diagonal is each conductor's capacitance to the reference."""
    plt = _pyplot()
    m = np.asarray(mutual, dtype=float)
    scale, symbol = prefix_for(np.abs(m).max() if m.size else 0.0)
    size = 1.2 + 0.7 * len(names)
    figure, axes = plt.subplots(figsize=(size + 1.5, size))
    image = axes.imshow(m / scale, cmap="viridis")
    labels = [chart_label(n) for n in names]
    axes.set_xticks(range(len(names)), labels=labels, rotation=45, ha="right")
    axes.set_yticks(range(len(names)), labels=labels)
    for (a, b), value in np.ndenumerate(m / scale):
        colour = "white" if value < 0.6 * (m / scale).max() else "black"
        axes.text(b, a, f"{value:.4g}", ha="center", va="center", color=colour, fontsize=9)
    figure.colorbar(image, ax=axes, label=f"capacitance ({symbol}F)")
    axes.set_title(f"Mutual capacitances; diagonal: to {chart_label(reference)}")
    data = _png(figure)
    plt.close(figure)
    return data


def line_profile(distance, magnitude, *, unit: str, title: str) -> bytes:
    """PNG bytes: |E| (kV/mm) against distance along a line (in ``unit``)."""
    plt = _pyplot()
    figure, axes = plt.subplots(figsize=(6, 3.5))
    axes.plot(np.asarray(distance), np.asarray(magnitude) / 1e6)
    axes.set_xlabel(f"distance along the line ({unit})")
    axes.set_ylabel("field magnitude (kV/mm)")
    axes.set_title(chart_label(title, 100))
    axes.grid(True, alpha=0.3)
    data = _png(figure)
    plt.close(figure)
    return data


def convergence_chart(names, study: dict, value, error) -> bytes:
    """PNG bytes: each self capacitance per refinement level against panel count, with
    the extrapolated value and its estimated error as a band (``study`` as in
    ``Result.study``; ``value``, ``error`` (K, K) farads)."""
    plt = _pyplot()
    panels = np.asarray(study["panels_per_level"], dtype=float)
    levels = np.asarray(study["matrices_per_level"], dtype=float)
    figure, axes = plt.subplots(figsize=(6.5, 4))
    for k, name in enumerate(names[:8]):
        c, e = value[k, k], error[k, k]
        line, = axes.plot(panels, (levels[:, k, k] / c - 1) * 100, "o-", label=chart_label(name))
        axes.axhspan(-e / c * 100, e / c * 100, color=line.get_color(), alpha=0.12)
    axes.axhline(0.0, color="black", linewidth=0.8)
    axes.set_xscale("log")
    axes.set_xticks(panels, labels=[f"{int(n):,}" for n in panels])
    axes.minorticks_off()
    axes.set_xlabel("panels")
    axes.set_ylabel("self capacitance vs extrapolated (%)")
    axes.set_title(f"Refinement study ({study['kind']}); bands: estimated error")
    axes.grid(True, alpha=0.3)
    axes.legend(fontsize=8)
    data = _png(figure)
    plt.close(figure)
    return data


def sweep_chart(parameter: str, records: list[dict], *, axis_label: str | None = None, most: int = 8) -> bytes:
    """PNG bytes: how the mutual capacitances of the finished variants change with one
    swept parameter, in % of their value at its first level (their size in the legend),
    the ``most`` largest capacitors, one colour each. Where other parameters vary too, the
    line joins the mean over them at each level and a bar spans their smallest to largest
    value. ``axis_label`` names the parameter with its unit."""
    plt = _pyplot()
    x = np.array([float(r["values"][parameter]) for r in records])
    names = records[0]["conductors"]
    mutual = np.array([r["mutual"] for r in records])  # (V, K, K)
    pairs = [(a, b) for a in range(len(names)) for b in range(a, len(names))]
    pairs.sort(key=lambda ab: -np.abs(mutual[:, ab[0], ab[1]]).max())
    scale, symbol = prefix_for(np.abs(mutual).max() if mutual.size else 0.0)
    levels = np.unique(x)
    figure, axes = plt.subplots(figsize=(6.5, 4))
    for a, b in pairs[:most]:
        other = records[0]["reference"] if a == b else names[b]
        values = [mutual[x == level, a, b] for level in levels]
        first = values[0].mean()
        percent = [100.0 * (v / first - 1.0) if first else np.zeros_like(v) for v in values]
        mean = np.array([v.mean() for v in percent])
        spread = np.array([[m - v.min() for v, m in zip(percent, mean)], [v.max() - m for v, m in zip(percent, mean)]])
        axes.errorbar(levels, mean, yerr=spread if spread.any() else None, fmt="o-", capsize=3,
                      label=chart_label(f"{names[a]} - {other} ({first / scale:.4g} {symbol}F)", 40))
    axes.axhline(0.0, color="0.5", linewidth=0.8)
    axes.set_xlabel(chart_label(axis_label or parameter, 80))
    axes.set_ylabel(f"change from {chart_label(parameter, 20)} = {levels[0]:.4g} (%)")
    varied = "; bars: the range over the other parameters" if len(levels) < len(x) else ""
    axes.set_title(chart_label(f"Mutual capacitances against {parameter}{varied}", 90), fontsize=10)
    axes.grid(True, alpha=0.3)
    axes.legend(fontsize=7, loc="center left", bbox_to_anchor=(1.01, 0.5))
    data = _png(figure)
    plt.close(figure)
    return data
