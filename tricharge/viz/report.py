"""The self-contained HTML report: one file, pictures embedded, no network requests.

A report is built in two steps. :func:`report_data` gathers everything the page shows
into plain data (SI numbers, names, the model's unit); :func:`report_html` lays that out.
The data can be saved as JSON (``tricharge report --json``) and the page made again from
it, with the field solution's ``.vtu`` for the picture, without solving again.

The page opens with one screen a colleague reads first (the matrix in both forms, the
checks in words, the error estimate, the worst hot spot and margin, the potentials);
long tables fold. Lengths are in the model's unit, fields in kV/mm, capacitances with
an engineering prefix; every number shown carries its SI value in a ``data-value``
attribute. Every name from a user's file is escaped.
"""

from __future__ import annotations

import base64

import numpy as np

from ..names import printable
from ..units import format_eng, metres_per

#: Version of the report's data layout (the JSON ``report --json`` writes).
REPORT_FORMAT = 1


def _escape(text, *, lines: bool = False) -> str:
    """HTML text of anything: printable (control characters shown escaped; newlines kept
    with ``lines``), then HTML-escaped."""
    import html

    if lines:
        return "\n".join(html.escape(printable(line)) for line in str(text).split("\n"))
    return html.escape(printable(text))


def _number(value: float, text: str) -> str:
    return f'<span data-value="{value!r}">{_escape(text)}</span>'


# -- the data ---------------------------------------------------------------------------

def report_data(model, result, field: dict | None = None, *, title: str, provenance: dict, caution_volts: float,
                margins_asked: bool = False) -> dict:
    """Everything the report shows, as plain data (SI units, JSON-ready).

    ``result`` is the capacitance :class:`~tricharge.bem.results.Result`, ``field`` the
    field solution's JSON data (:func:`tricharge.io.outputs.field_json_data`) or None;
    cautions are shown when the largest applied or computed potential reaches
    ``caution_volts`` or margins were asked for.
    """
    parts = [{"name": p.name, "kind": p.kind, "surfaces": list(p.surfaces), "panels": p.panels, "area_m2": p.area,
              "panel_size_m": [p.smallest, p.largest], "condition": p.detail} for p in model.survey.parts]
    highest = float(np.max(np.abs(field["potentials_V"]))) if field and field["potentials_V"] else 0.0
    return {"report_format": REPORT_FORMAT, "title": title, "unit": model.unit,
            "model": {"conductors": len(model.conductors), "interfaces": len(model.interfaces),
                      "panels": model.n_panels, "parts": parts, "background_medium": model.background,
                      "relative_permittivities": {m.name: m.permittivity for m in model.media},
                      "ground_plane_z_m": model.ground_z},
            "capacitance": result.to_dict(), "field": field,
            "cautions": bool(margins_asked or highest >= caution_volts), "caution_volts": caution_volts,
            "provenance": provenance}


# -- the page -------------------------------------------------------------------------------

def _matrix(names, matrix, errors=None, caption: str = "") -> str:
    head = "".join(f"<th>{_escape(n)}</th>" for n in names)
    matrix = np.asarray(matrix, dtype=float)
    errors = None if errors is None else np.asarray(errors, dtype=float)
    rows = []
    for a, name in enumerate(names):
        cells = []
        for b in range(len(names)):
            text = format_eng(matrix[a, b], "F") + (f" ± {format_eng(errors[a, b], 'F')}" if errors is not None else "")
            cells.append(f"<td>{_number(float(matrix[a, b]), text)}</td>")
        rows.append(f"<tr><th>{_escape(name)}</th>{''.join(cells)}</tr>")
    return f'<table class="matrix"><caption>{_escape(caption)}</caption><tr><th></th>{head}</tr>{"".join(rows)}</table>'


def _table(header, rows) -> str:
    head = "".join(f"<th>{_escape(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{c if isinstance(c, _Html) else _escape(c)}</td>" for c in row) + "</tr>"
                   for row in rows)
    return f"<table><tr>{head}</tr>{body}</table>"


class _Html(str):
    """Text that is already HTML (a number with its data-value)."""


def _checks_in_words(checks: dict) -> list[str]:
    words = [f"symmetric to within {checks['asymmetry']:.1e} of the largest self capacitance"
             + ("" if checks["asymmetry"] < 1e-2 else " (large: refine the mesh)")]
    words.append("every self capacitance is positive" if checks["positive_diagonal"] else
                 "a self capacitance is not positive: the solution is not physical")
    words.append("no coupling is positive" if checks["nonpositive_offdiagonal"] else
                 "a coupling is positive: the solution is not physical")
    words.append("no capacitance to the reference is negative" if checks["diagonally_dominant"] else
                 "a capacitance to the reference is negative: the solution is not physical")
    words += [f"note: {note}" for note in checks.get("within_accuracy", [])]
    words += [f"problem: {problem}" for problem in checks["problems"]]
    return words


def _estimate_line(cap: dict) -> str:
    errors = cap.get("error_estimate")
    if errors is None:
        return "Discretisation error not estimated (a single solve; --levels 3 adds value ± estimate)."
    c, e = np.abs(np.asarray(cap["capacitance_matrix"])), np.asarray(errors)
    matters = c >= 0.01 * np.diag(c)[:, None]  # entries of at least 1 % of their row, as the study's target
    worst = float(np.max(e[matters] / c[matters]))
    study = cap["refinement_study"]
    return (f"Largest estimated error: {worst:.2%} of its entry ({study['kind']} refinement study, panels "
            + " -> ".join(f"{n:,}" for n in study["panels_per_level"])
            + f"). The estimate covers the {study.get('covers', 'discretisation of the mesh as given')}.")


def _at_a_glance(data: dict) -> list[str]:
    cap, unit = data["capacitance"], data["unit"]
    names = cap["conductors"]
    errors = cap.get("error_estimate")
    study = " ± estimated error" if errors is not None else ""
    panels = data["model"]["panels"]
    parts = ["<h2>At a glance</h2>",
             f"<p>{len(names)} conductors, {panels:,} panels, unit {_escape(unit)}; solved by the "
             f"{_escape(cap['method'])} method in {cap['solve_time_s']:.1f} s; reference of the mutual form: "
             f"{_escape(cap['reference'])}.</p>",
             _matrix(names, cap["capacitance_matrix"], errors, f"Maxwell form (Q = C V){study}"),
             _matrix(names, cap["mutual_matrix"], cap.get("mutual_error_estimate"),
                     f"Mutual form: couplings; diagonal to {cap['reference']}{study}"),
             "<p>Checks: " + "; ".join(_escape(w) for w in _checks_in_words(cap["checks"])) + ".</p>",
             f"<p>{_escape(_estimate_line(cap))}</p>"]
    field = data.get("field")
    if field:
        parts += _field_glance(field, unit)
    return parts


def _field_glance(field: dict, unit: str) -> list[str]:
    scale = metres_per(unit)
    rows = [[name, _Html(_number(v, format_eng(v, "V", keep_zeros=False))), _Html(_number(q, format_eng(q, "C")))]
            for name, v, q in zip(field["conductors"], field["potentials_V"], field["free_charge_C"])]
    parts = ["<h3>Potentials and charges</h3>", _table(["conductor", "potential", "free charge"], rows)]
    if field["hot_spots"]:
        worst = max(field["hot_spots"], key=lambda s: s["field_V_per_m"])
        where = ", ".join(f"{x / scale:.4g}" for x in worst["location_m"])
        sharp = f", on a sharp feature ({worst['sharp_angle_deg']:.0f} deg)" if worst["sharp"] else ""
        peak = worst["field_V_per_m"]
        parts.append(f"<p>Highest surface field: {_number(peak, f'{peak / 1e6:.4g} kV/mm')}"
                     f" on {_escape(worst['part'])} at ({_escape(where)}) {unit}, panel "
                     f"{worst['panel_size_m'] / scale:.3g} {unit}{_escape(sharp)}.</p>")
    for margin in field["margins"]:
        peak, strength = margin["peak_V_per_m"], margin["withstand_V_per_m"]
        verdict = "exceeded" if peak >= strength else f"margin {strength / peak:.2f}x"
        parts.append(f"<p>Margin in {_escape(margin['medium'])}: peak {peak / 1e6:.4g} kV/mm against "
                     f"{strength / 1e6:.4g} kV/mm ({verdict}).</p>")
    if field.get("utilisation") is not None:
        parts.append(f"<p>Gap between the two electrodes {field['gap_m'] / scale:.4g} {unit}; utilisation factor "
                     f"E_mean/E_max = {field['utilisation']:.3f}.</p>")
    return parts


def _details(summary: str, body: str) -> str:
    return f"<details><summary>{_escape(summary)}</summary>{body}</details>"


def _folded(data: dict) -> list[str]:
    unit = data["unit"]
    scale = metres_per(unit)
    rows = [[p["name"], p["kind"], ", ".join(p["surfaces"]), f"{p['panels']:,}", f"{p['area_m2'] / scale**2:.4g}",
             f"{p['panel_size_m'][0] / scale:.3g}..{p['panel_size_m'][1] / scale:.3g}", p["condition"]]
            for p in data["model"]["parts"]]
    media = ", ".join(f"{k} {v:g}" for k, v in data["model"]["relative_permittivities"].items()) or "vacuum 1"
    out = [_details(f"Model: {len(rows)} parts; relative permittivities: {media}",
                    _table(["part", "kind", "surfaces", "panels", f"area ({unit}2)", f"panel size ({unit})",
                            "condition"], rows))]
    field = data.get("field")
    if field and field["hot_spots"]:
        spots = [[s["part"], s["rank"], _Html(_number(s["field_V_per_m"], f"{s['field_V_per_m'] / 1e6:.4g} kV/mm")),
                  ", ".join(f"{x / scale:.4g}" for x in s["location_m"]), f"{s['panel_size_m'] / scale:.3g}",
                  f"sharp ({s['sharp_angle_deg']:.0f} deg)" if s["sharp"] else ""] for s in field["hot_spots"]]
        out.append(_details(f"Hot spots: {len(spots)}", _table(
            ["part", "#", "|E|", f"where ({unit})", f"panel ({unit})", "feature"], spots)))
    out.append(_details("Provenance", _table(["item", "value"], [[k, v] for k, v in data["provenance"].items()])))
    return out


def report_html(data: dict, images=()) -> str:
    """The page for report ``data`` (:func:`report_data`) and ``images`` [(caption, png)]."""
    from ..terminal import CAUTIONS

    parts = [f"<h1>{_escape(data['title'])}</h1>", *_at_a_glance(data)]
    if data["cautions"]:
        parts.append(f'<pre class="cautions">{_escape(CAUTIONS, lines=True)}</pre>')
    for caption, png in images:
        parts.append(f'<figure><img alt="{_escape(caption)}" src="data:image/png;base64,'
                     f'{base64.b64encode(png).decode()}"><figcaption>{_escape(caption)}</figcaption></figure>')
    parts += _folded(data)
    style = ("body{font-family:sans-serif;max-width:1100px;margin:2em auto;color:#222}"
             "table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #ccc;padding:3px 8px;"
             "text-align:right}caption{font-weight:bold;text-align:left}img{max-width:100%}"
             "details{margin:1em 0}summary{cursor:pointer;font-weight:bold}"
             ".cautions{background:#fff6e0;padding:1em;white-space:pre-wrap}")
    return ("<!DOCTYPE html><html><head><meta charset=\"utf-8\">"
            f"<title>{_escape(data['title'])}</title><style>{style}</style></head><body>"
            + "\n".join(parts) + "</body></html>\n")


def report_images(data: dict, picture=None) -> list:
    """[(caption, png bytes)]: the mutual matrix as a heat map, the refinement study's
    chart when a study ran, and ``picture`` (a field :class:`~tricharge.viz.render.Picture`)."""
    from .plots import convergence_chart, matrix_heatmap
    from .render import png_bytes

    cap = data["capacitance"]
    images = [("Mutual capacitances", matrix_heatmap(cap["conductors"], np.asarray(cap["mutual_matrix"]),
                                                     reference=cap["reference"]))]
    if cap.get("refinement_study"):
        images.append(("Refinement study: self capacitances per level against the extrapolated value",
                       convergence_chart(cap["conductors"], cap["refinement_study"],
                                         np.asarray(cap["capacitance_matrix"]), np.asarray(cap["error_estimate"]))))
    if picture is not None:
        images.append(("Surface field with the applied voltages; numbered markers are the hot spots",
                       png_bytes(picture)))
    return images


def sweep_html(sweep, records: list[dict], charts) -> str:
    """A page for a sweep: what was swept, how many variants finished or failed (with their
    errors), the charts, and the table of mutual capacitances per variant."""
    names = [p.name for p in sweep.parameters]
    done = [r for r in records if r["status"] == "done"]
    failed = [r for r in records if r["status"] != "done"]
    parts = [f"<h1>{_escape('tricharge sweep: ' + sweep.source)}</h1>",
             f"<p>{len(records):,} variants ({sweep.combine}) of {_escape(', '.join(names))}: {len(done):,} solved, "
             f"{len(failed):,} failed.</p>"]
    for name, png in charts:
        parts.append(f'<figure><img alt="{_escape(name)}" src="data:image/png;base64,'
                     f'{base64.b64encode(png).decode()}"><figcaption>{_escape(name)}</figcaption></figure>')
    if done:
        conductors = done[0]["conductors"]
        pairs = [(a, b) for a in range(len(conductors)) for b in range(a, len(conductors))]
        header = ["variant", *names] + [f"{conductors[a]} - {conductors[b] if a != b else done[0]['reference']}"
                                        for a, b in pairs]
        rows = [[r["index"], *[r["values"][n] for n in names]]
                + [_Html(_number(r["mutual"][a][b], format_eng(r["mutual"][a][b], "F"))) for a, b in pairs]
                for r in done]
        parts.append(_details(f"Mutual capacitances of {len(done):,} variants", _table(header, rows)))
    if failed:
        parts.append(_details(f"Failed variants: {len(failed):,}", _table(
            ["variant", *names, "error"], [[r["index"], *[r["values"][n] for n in names], r.get("error", "")]
                                           for r in failed])))
    style = ("body{font-family:sans-serif;max-width:1100px;margin:2em auto;color:#222}"
             "table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #ccc;padding:3px 8px;"
             "text-align:right}img{max-width:100%}details{margin:1em 0}summary{cursor:pointer;font-weight:bold}")
    return (f"<!DOCTYPE html><html><head><meta charset=\"utf-8\"><title>tricharge sweep</title><style>{style}"
            "</style></head><body>" + "\n".join(parts) + "</body></html>\n")
