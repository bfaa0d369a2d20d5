"""The ``sectio`` command: parse, call the library, write, print.

Subcommands live in :mod:`sectio.commands` and are imported only when used, so that
``sectio --help`` starts quickly. Errors a user can cause (:class:`sectio.errors.InputError`)
are printed as one sentence, without a traceback, with exit status 2.
"""

from __future__ import annotations

import importlib
import sys

import click

from . import __version__

#: name -> (module, attribute, one-line help)
SUBCOMMANDS = {
    "grains": (
        "sectio.commands.grains",
        "grains_command",
        "Grain size (mean lineal intercept, planimetric count, G) from micrographs.",
    ),
    "particles": (
        "sectio.commands.particles",
        "particles_command",
        "Particle volume fraction, size distribution and spacing.",
    ),
    "phases": (
        "sectio.commands.phases",
        "phases_command",
        "Area (= volume) fraction of several grey-level phases, with an E562 point count.",
    ),
    "strength": (
        "sectio.commands.strength",
        "strength_command",
        "Yield-strength estimate (Hall-Petch, Orowan) with a 95 % interval.",
    ),
    "fit-hall-petch": (
        "sectio.commands.strength",
        "fit_hall_petch_command",
        "Fit Hall-Petch constants to your own grain size / yield data.",
    ),
    "materials": (
        "sectio.commands.strength",
        "materials_command",
        "List the materials data available for strength estimates.",
    ),
    "calibrate": (
        "sectio.commands.calibrate",
        "calibrate_command",
        "Measure µm per pixel of an objective (stage micrometer or scale bar) and store it.",
    ),
    "study": (
        "sectio.commands.study",
        "study_command",
        "Run a whole study (specimens x fields) from a TOML file and write a report.",
    ),
    "review": (
        "sectio.commands.review",
        "review_command",
        "Review and correct the fields of a run in the browser; the edits are kept.",
    ),
    "synth": (
        "sectio.commands.synth",
        "synth_group",
        "Make synthetic micrographs with exact ground truth.",
    ),
}


class LazyGroup(click.Group):
    """A click group whose subcommands are imported on first use."""

    def list_commands(self, ctx):
        return list(SUBCOMMANDS)

    def get_command(self, ctx, name):
        if name not in SUBCOMMANDS:
            return None
        module, attr, _ = SUBCOMMANDS[name]
        try:
            mod = importlib.import_module(module)
        except ModuleNotFoundError as exc:  # a part not installed in this build
            if exc.name and exc.name.startswith("sectio"):
                return None
            raise
        return getattr(mod, attr)

    def format_commands(self, ctx, formatter):
        rows = [(name, help_) for name, (_, _, help_) in SUBCOMMANDS.items()]
        with formatter.section("Commands"):
            formatter.write_dl(rows)


@click.group(cls=LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="sectio")
def cli():
    """Measure metal microstructures from micrographs of polished sections.

    Grain size by the mean lineal intercept and planimetric methods (ASTM E112 / E1382,
    ISO 643 numbers), particle volume fraction and size distribution, and a yield-strength
    estimate with honest 95 % bounds. Results go to JSON, CSV and overlay pictures.

    Example:  sectio grains field*.tif --pixel-size 0.5um --out results
    """


def main(argv=None) -> int:
    """Entry point of the console script; returns the exit status."""
    from .errors import InputError

    for stream in (sys.stdout, sys.stderr):  # file names may hold undecodable bytes
        if hasattr(stream, "reconfigure") and getattr(stream, "errors", "") == "strict":
            stream.reconfigure(errors="backslashreplace")
    try:
        rv = cli.main(args=argv, prog_name="sectio", standalone_mode=False)
    except InputError as exc:
        click.echo(f"sectio: {exc}", err=True)
        return 2
    except click.exceptions.Abort:
        click.echo("sectio: interrupted; results already written are kept.", err=True)
        return 130
    except click.ClickException as exc:
        exc.show()
        return exc.exit_code
    except KeyboardInterrupt:
        click.echo("sectio: interrupted; results already written are kept.", err=True)
        return 130
    return int(rv or 0)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())


def console_main() -> None:  # pragma: no cover - thin wrapper for the console script
    """Run the ``sectio`` console script and exit with its status."""
    sys.exit(main())
