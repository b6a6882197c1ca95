"""The sweep command: run a family of variants, on this machine or a Dask cluster."""

from __future__ import annotations

from pathlib import Path

import click

from ..errors import OptionError
from ..names import printable
from ..terminal import Terminal
from .common import TEXT_FILE, cli, quiet_option


@cli.command()
@click.argument("sweep_path", metavar="SWEEP", type=click.Path(path_type=Path))
@click.option("--out", "folder", type=click.Path(file_okay=False, path_type=Path), required=True,
              help="Folder for the results: one file per variant as it finishes (a rerun resumes), the table "
                   "(CSV, and Parquet with pyarrow) and charts.")
@click.option("--workers", type=click.IntRange(1, 256), help="Worker processes of a Dask cluster on this machine "
              "[default: one per core].")
@click.option("--scheduler", metavar="ADDRESS", help="Run on an existing Dask cluster, e.g. tcp://10.0.0.5:8786.")
@click.option("--serial", is_flag=True, help="Run the variants one after another in this process (no Dask).")
@click.option("--html", "html_path", type=TEXT_FILE, help="Also write a page with the table's charts.")
@quiet_option
def sweep(sweep_path: Path, folder: Path, workers, scheduler, serial: bool, html_path, quiet: bool):
    """Solve every variant of the SWEEP file (TOML: a base model and parameters that
    change permittivities, voltages, part positions or whole files) and tabulate them."""
    from ..extras import require
    from ..io.files import Outputs
    from ..io.sweepfile import read_sweep
    from ..sweep.run import Store, run_sweep
    from ..sweep.variants import check_sweep

    if serial and (workers or scheduler):
        raise OptionError("--serial runs here, one variant after another: leave out --workers and --scheduler")
    if workers and scheduler:
        raise OptionError("--workers starts a cluster here and --scheduler uses an existing one: give one")
    plan = Outputs(inputs=[sweep_path])
    html_target = plan.add("--html", html_path)
    if folder.exists() and not folder.is_dir():
        raise OptionError(f"--out {printable(folder)}: is a file; give a folder for the results")
    if not folder.parent.is_dir():
        raise OptionError(f"--out {printable(folder)}: folder {printable(folder.parent)} does not exist; create it")
    if not serial:
        require("sweep", "a sweep on Dask (or run it with --serial)")
    terminal = Terminal(quiet)
    spec = read_sweep(sweep_path)
    check_sweep(spec)  # everything checked before the results folder is made
    folder.mkdir(exist_ok=True)
    plan.add("--out", folder / "table.csv")
    variants = spec.variants()
    terminal.say(f"sweep {printable(sweep_path.name)}: {len(variants):,} variants of {len(spec.parameters)} "
                 f"parameters ({spec.combine}); results in {printable(folder)}")
    store = Store(folder)
    progress = _progress(terminal)
    if serial:
        records = run_sweep(spec, store, progress=progress)
    else:
        records = _on_dask(spec, store, workers, scheduler, progress)
    _finish(spec, records, folder, html_target, plan, terminal)


def _progress(terminal):
    last = [None]

    def say(done, failed, remaining):
        if (done, failed, remaining) != last[0]:
            last[0] = (done, failed, remaining)
            terminal.say(f"  variants: {done:,} done, {failed:,} failed, {remaining:,} remaining")
    return say


def _on_dask(spec, store, workers, scheduler, progress):
    from ..sweep.run import dask_mapper, local_cluster, run_sweep

    if scheduler:
        from distributed import Client

        with Client(scheduler, timeout="30s") as client:
            return run_sweep(spec, store, mapper=dask_mapper(client), progress=progress)
    with local_cluster(workers, search_path=[spec.folder]) as client:
        return run_sweep(spec, store, mapper=dask_mapper(client), progress=progress)


def _finish(spec, records, folder: Path, html_target, plan, terminal) -> None:
    """The table (CSV, Parquet), the charts and the page, written together at the end."""
    from ..io.files import Outputs
    from ..io.sweeptable import table_csv, table_rows, write_parquet

    header, rows = table_rows(spec, records)
    outputs = Outputs(inputs=list(plan.inputs))
    csv_target = outputs.add("table", folder / "table.csv")
    import importlib.util

    parquet = (outputs.add("table", folder / "table.parquet", text=False)
               if importlib.util.find_spec("pyarrow") else None)
    charts = _charts(spec, records)
    chart_targets = [(outputs.add("chart", folder / f"chart_{name}.png", text=False), png) for name, png in charts]
    page = None
    if html_target is not None:
        from ..viz.report import sweep_html

        page = sweep_html(spec, records, charts)
    with outputs.transaction() as stage:
        stage.text(csv_target, table_csv(header, rows))
        stage.file(parquet, lambda path: write_parquet(path, header, rows))
        for target, png in chart_targets:
            stage.bytes(target, png)
        stage.text(html_target, page)
    failed = [r for r in records if r["status"] != "done"]
    terminal.flush_warnings()
    terminal.say(f"wrote {printable(folder / 'table.csv')} ({len(rows):,} rows) and {len(charts)} charts")
    for record in failed[:5]:
        terminal.say(f"  variant {record['index']} failed: {printable(record.get('error', ''))}")


def _charts(spec, records) -> list[tuple[str, bytes]]:
    """[(parameter name, PNG)]: every mutual capacitance against each numeric parameter."""
    from ..extras import missing

    if missing("viz"):
        return []
    from ..viz.plots import sweep_chart

    done = [r for r in records if r["status"] == "done"]
    out = []
    for p in spec.parameters:
        if p.change == "model" or not done:
            continue
        out.append((p.name, sweep_chart(p.name, done, axis_label=p.axis_label(done[0].get("unit", "m")))))
    return out
