"""The ``study`` command: run a whole study (specimens × fields) from a TOML file.

Thin: read the study file, run it (local processes or a Dask scheduler) with a progress bar
on stderr, print where the results are and a short table. Exit status 1 when a field could
not be measured (the rest are done), 2 for errors in the study file or options.
"""

from __future__ import annotations

import sys

import click

from ._common import csv_dialect_option, max_image_memory_option


@click.command("study", context_settings={"help_option_names": ["-h", "--help"]})
@click.argument("study_file", type=click.Path(dir_okay=False))
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False),
              help="Output folder; rerunning into the same folder skips finished fields.")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Local worker processes [default: number of CPU cores].")
@click.option("--scheduler", default=None,
              help="Run the fields on a Dask cluster, tcp://HOST:PORT (needs sectio[dask]).")
@click.option("--no-report", is_flag=True, help="Skip report.html and report.pdf.")
@click.option("--report-number", help="Report number in the header (else [report] number).")
@click.option("--operator", help="Who prepared the sections and ran the analysis.")
@click.option("--date", "report_date", help="Date of the report, e.g. 2026-12-02.")
@click.option("--laboratory", help="Laboratory name in the header.")
@click.option("--standard", "standards", multiple=True,
              help="A standard followed (repeat for several), e.g. --standard 'ASTM E112-13'.")
@click.option("--checked-by", help="Name printed in the sign-off block as checker.")
@click.option("--approved-by", help="Name printed in the sign-off block as approver.")
@max_image_memory_option
@csv_dialect_option
@click.pass_context
def study_command(ctx, study_file, out_dir, workers, scheduler, no_report, report_number,
                  operator, report_date, laboratory, standards, checked_by, approved_by,
                  csv_dialect):
    """Measure every field of every specimen named in STUDY_FILE and write a report.

    Writes per specimen grains.json / particles.json / strength.json, then study.json,
    report.html (self-contained) and report.pdf. Results are saved field by field, so an
    interrupted run loses nothing: run the same command again to finish it.

    Example:  sectio study sample_images/demo_study.toml --out demo_out
    """
    from ..study import load_study, run_study, with_report_fields

    study = with_report_fields(
        load_study(study_file), number=report_number, operator=operator, date=report_date,
        laboratory=laboratory, standards=standards, checked_by=checked_by,
        approved_by=approved_by)
    state = {"bar": None}

    def progress(done, total):
        if state["bar"] is None:
            if total == 0:
                return
            state["bar"] = click.progressbar(length=total, label="measuring fields",
                                             file=sys.stderr,
                                             show_pos=True, show_eta=True)
            state["bar"].__enter__()
        state["bar"].update(done - state["bar"].pos)
        if done >= total:
            state["bar"].__exit__(None, None, None)

    try:
        run = run_study(study, out_dir, workers=workers, scheduler=scheduler,
                        report=not no_report, progress=progress, csv_dialect=csv_dialect)
    finally:
        bar = state["bar"]
        if bar is not None and bar.pos < bar.length:
            bar.__exit__(None, None, None)
    doc = run.study_doc
    click.echo(f"{len(doc['specimens'])} specimen(s); {run.computed} field(s) measured, "
               f"{run.reused} reused from an earlier run, {len(run.failed)} failed; "
               f"{run.seconds:.1f} s.")
    for e in doc["specimens"]:
        g, p, st = e.get("grains") or {}, e.get("particles") or {}, e.get("strength")
        bits = []
        if g.get("n_fields"):
            bits.append(f"G {g['astm_g']:.1f}")
        if p.get("n_fields"):
            bits.append(f"A_A {100 * p['area_fraction']:.2f} %")
        if st:
            lo, hi = st["yield_mpa"]["ci95"]
            bits.append(f"yield estimate {st['yield_mpa']['median']:.0f} MPa "
                        f"[{lo:.0f}, {hi:.0f}]")
        click.echo(f"  {e['name']:<16} " + ", ".join(bits))
    for f in run.failed:
        click.echo(f"  failed: {f['specimen']} {f['image']} ({f['kind']}): {f['reason']}",
                   err=True)
    click.echo("Yield values are model estimates, not a substitute for tensile testing "
               "(ASTM E8/E8M, ISO 6892-1) nor design allowables.")
    outs = "study.json" + ("" if no_report else ", report.html, report.pdf")
    click.echo(f"wrote {outs} in {out_dir}")
    if run.failed:
        ctx.exit(1)
    return 0
