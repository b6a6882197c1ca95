"""A sweep's results as one long table: a row per variant and quantity, the parameter
values as columns. CSV always (names quoted and never spreadsheet formulas); Parquet
when pyarrow is installed."""

from __future__ import annotations

import csv
import io

from ..names import csv_cell

#: Columns after the parameter values.
COLUMNS = ("quantity", "a", "b", "value", "unit", "status", "error")


def table_rows(sweep, records: list[dict]) -> tuple[list[str], list[list]]:
    """(header, rows): per finished variant the Maxwell and the mutual form of every pair
    (each once, a <= b), and with fields the peak |E| per part and the margin per medium;
    per failed variant one row with its error."""
    names = [p.name for p in sweep.parameters]
    header = ["variant", *names, *COLUMNS]
    rows = []
    for record in records:
        values = [record["values"][n] for n in names]
        lead = [record["index"], *values]
        if record["status"] != "done":
            rows.append([*lead, "", "", "", "", "", "failed", record.get("error", "")])
            continue
        conductors = record["conductors"]
        for form in ("maxwell", "mutual"):
            matrix = record[form]
            for i, a in enumerate(conductors):
                for j in range(i, len(conductors)):
                    b = conductors[j] if (form == "maxwell" or i != j) else record["reference"]
                    rows.append([*lead, form, a, b, matrix[i][j], "F", "done", ""])
        for part, peak in record.get("peaks", {}).items():
            rows.append([*lead, "peak_field", part, "", peak, "V/m", "done", ""])
        for medium, margin in record.get("margins", {}).items():
            rows.append([*lead, "margin", medium, "", margin, "", "done", ""])
    return header, rows


def table_csv(header, rows) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([csv_cell(h) for h in header])
    for row in rows:
        writer.writerow([csv_cell(c) if isinstance(c, str) else repr(c) if isinstance(c, float) else c for c in row])
    return buffer.getvalue()


def write_parquet(path, header, rows) -> bool:
    """Write the table as Parquet when pyarrow is installed; False when it is not."""
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError:
        return False
    def column(values):
        if values and all(isinstance(v, int) and not isinstance(v, bool) for v in values):
            return pa.array(values, type=pa.int64())
        if all((isinstance(v, (int, float)) and not isinstance(v, bool)) or v == "" for v in values):
            return pa.array([None if v == "" else float(v) for v in values], type=pa.float64())
        return pa.array([str(v) for v in values], type=pa.string())

    table = pa.table({name: column([row[k] for row in rows]) for k, name in enumerate(header)})
    pq.write_table(table, str(path))
    return True
