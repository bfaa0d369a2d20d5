"""The ``review`` command: a local page to check and correct the fields of a run.

Starts the review server (:mod:`sectio.review.server`) on 127.0.0.1 and a free port with a
random access token, prints the address, opens the browser when there is one, and serves
until Ctrl+C. Edits are written at once to edit files beside the results.
"""

from __future__ import annotations

import click


@click.command("review", context_settings={"help_option_names": ["-h", "--help"]})
@click.argument("out_dir", type=click.Path(file_okay=False))
@click.option("--port", type=click.IntRange(0, 65535), default=0, show_default=True,
              help="Port on 127.0.0.1 (0: a free one).")
@click.option("--by", default="", help="Your name or initials, stored with every edit.")
@click.option("--no-browser", is_flag=True, help="Only print the address; do not open a browser.")
def review_command(out_dir, port, by, no_browser):
    """Review and correct the fields of OUT_DIR (the --out folder of sectio grains,
    particles or study) in the browser.

    Join grains, cut a grain along a stroke, leave a region out, mark twin boundaries;
    delete, add, split or join particles; undo and redo; mark fields reviewed or
    rejected. Each field's edits go to <image>_<kind>_edits.json beside its results and
    are applied again by later runs of sectio grains, particles and study.

    Example:  sectio review results --by JS
    """
    from ..review.server import ReviewServer, prepare_in_background
    from ..review.session import ReviewSession

    session = ReviewSession(out_dir, by=by)
    server = ReviewServer(session, port=port)
    click.echo(f"Review page for {len(session.fields)} field(s) of {out_dir}:")
    click.echo(f"  {server.url}")
    click.echo("Edits are saved as you make them. Stop with Ctrl+C.")
    prepare_in_background(session)
    if not no_browser:
        import webbrowser

        try:
            webbrowser.open(server.url)
        except Exception:  # noqa: BLE001 - no browser here: the address is printed
            pass
    try:
        server.serve_forever()
    except KeyboardInterrupt:
        click.echo("review stopped; the edits are kept.")
    finally:
        server.stop()
    return 0
