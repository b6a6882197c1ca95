"""A self-contained HTML report: one file, images embedded, no network requests.

Every name that came from a user's file is escaped, so a conductor called ``<script>``
shows as text.
"""

from __future__ import annotations

import base64

import numpy as np

from ..names import printable
from ..units import format_eng


def _escape(text, *, lines: bool = False) -> str:
    """HTML text of anything: printable (control characters shown escaped; newlines kept
    with ``lines``), then HTML-escaped."""
    import html

    if lines:
        return "\n".join(html.escape(printable(line)) for line in str(text).split("\n"))
    return html.escape(printable(text))


def _image(png: bytes, alt: str) -> str:
    return f'<img alt="{_escape(alt)}" src="data:image/png;base64,{base64.b64encode(png).decode()}">'


def _matrix_table(names, matrix, caption: str, errors=None) -> str:
    head = "".join(f"<th>{_escape(n)}</th>" for n in names)
    errors = np.zeros_like(np.asarray(matrix)) if errors is None else np.asarray(errors)
    show = np.any(errors)

    def cell(x, e):
        return _escape(format_eng(x, "F") + (f" ± {format_eng(e, 'F')}" if show else ""))
    rows = "".join(
        f"<tr><th>{_escape(n)}</th>" + "".join(f"<td>{cell(x, e)}</td>" for x, e in zip(row, err)) + "</tr>"
        for n, row, err in zip(names, np.asarray(matrix), errors))
    return f'<table class="matrix"><caption>{_escape(caption)}</caption><tr><th></th>{head}</tr>{rows}</table>'


def _rows(header, rows) -> str:
    head = "".join(f"<th>{_escape(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{_escape(str(c))}</td>" for c in row) + "</tr>" for row in rows)
    return f"<table><tr>{head}</tr>{body}</table>"


def report_html(*, title: str, summary: list[str], model_rows: list, result, field=None, images=(),
                cautions: str = "", provenance: dict | None = None) -> str:
    """The report page.

    summary : lines of plain text; model_rows : rows (name, kind, panels, area, condition)
    result : capacitance Result; field : FieldResult or None (hot spots)
    images : [(caption, png bytes)]; cautions : text; provenance : key -> value
    """
    from ..bem.results import mutual_error

    errors = result.error_estimate
    estimated = " ± estimated error" if errors is not None else ""
    parts = [f"<h1>{_escape(title)}</h1>", "<ul>" + "".join(f"<li>{_escape(s)}</li>" for s in summary) + "</ul>",
             "<h2>Model</h2>", _rows(["part", "kind", "panels", "area", "condition"], model_rows),
             "<h2>Capacitance</h2>",
             _matrix_table(result.conductors, result.capacitance, f"Maxwell form (Q = C V){estimated}", errors),
             _matrix_table(result.conductors, result.mutual,
                           f"Mutual form: couplings; diagonal to {result.reference}{estimated}",
                           None if errors is None else mutual_error(errors)),
             "<h2>Checks</h2>",
             _rows(["check", "value"], [["asymmetry", f"{result.checks.asymmetry:.1e}"],
                                        ["self capacitances positive", result.checks.positive_diagonal],
                                        ["couplings non-positive", result.checks.nonpositive_offdiagonal],
                                        ["row sums non-negative", result.checks.diagonally_dominant]]
                   + [["problem", p] for p in result.checks.problems])]
    if field is not None:
        rows = [[field.parts[s.group], s.rank, f"{s.field / 1e6:.4g} kV/mm",
                 ", ".join(f"{x:.4g}" for x in s.location), f"sharp ({s.sharp_angle:.0f} deg)" if s.sharp else ""]
                for s in field.spots]
        parts += ["<h2>Hot spots</h2>", _rows(["part", "#", "|E|", "where (m)", "feature"], rows)]
        if cautions:
            parts.append(f'<pre class="cautions">{_escape(cautions, lines=True)}</pre>')
    for caption, png in images:
        parts.append(f"<figure>{_image(png, caption)}<figcaption>{_escape(caption)}</figcaption></figure>")
    if provenance:
        parts += ["<h2>Provenance</h2>", _rows(["item", "value"], [[k, v] for k, v in provenance.items()])]
    style = ("body{font-family:sans-serif;max-width:1100px;margin:2em auto;color:#222}"
             "table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #ccc;padding:3px 8px;"
             "text-align:right}caption{font-weight:bold;text-align:left}img{max-width:100%}"
             ".cautions{background:#fff6e0;padding:1em;white-space:pre-wrap}")
    return ("<!DOCTYPE html><html><head><meta charset=\"utf-8\">"
            f"<title>{_escape(title)}</title><style>{style}</style></head><body>"
            + "\n".join(parts) + "</body></html>\n")


def build_report(model, result, field=None, *, title: str, provenance: dict) -> str:
    """The whole page for a model, its capacitance result and (optionally) a field
    solution: the model table, charts and pictures drawn here, provenance."""
    from ..terminal import CAUTIONS
    from . import field_picture
    from .plots import convergence_chart, matrix_heatmap
    from .render import png_bytes

    images = [("Mutual capacitances", matrix_heatmap(result.conductors, result.mutual, reference=result.reference))]
    if result.study is not None:
        images.append(("Refinement study: self capacitances per level against the extrapolated value",
                       convergence_chart(result.conductors, result.study, result.capacitance, result.error_estimate)))
    if field is not None:
        picture, _ = field_picture(model, field)
        images.append(("Surface field with the applied voltages; numbered markers are the hot spots",
                       png_bytes(picture)))
    rows = [[p.name, p.kind, p.panels, f"{p.area:.4g} m2", p.detail] for p in model.survey.parts]
    study = result.study
    summary = [f"{len(model.conductors)} conductors, {len(model.interfaces)} interfaces, {model.n_panels} panels, "
               f"unit {model.unit}", f"solved by the {result.method} method in {result.solve_time:.1f} s"
               + (f" ({study['kind']} refinement study, panels "
                  + " -> ".join(f"{n:,}" for n in study["panels_per_level"]) + ")" if study else
                  "; discretisation error not estimated (--levels 3 adds it)"),
               f"reference of the mutual form: {result.reference}"]
    return report_html(title=title, summary=summary, model_rows=rows, result=result, field=field, images=images,
                       cautions=CAUTIONS, provenance=provenance)
