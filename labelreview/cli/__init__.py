"""The ``labelreview`` command line: parse arguments, call the core, print.

One module per command (or command group) beside this one; each defines a plain click command
and is registered on :data:`cli` below. Shared options and error handling live in
:mod:`labelreview.cli._common`; exit codes are documented there.
"""

from __future__ import annotations

import click

from labelreview.cli._common import EXIT_BAD_INPUT, EXIT_FOUND, handle_errors


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.option("--debug", is_flag=True, help="Show tracebacks for errors.")
@click.version_option(package_name="labelreview")
def cli(debug: bool) -> None:
    """Review a labelled dataset's vocabulary for labels that pass judgement on people.

    Flags are candidates for human judgement; a clean scan does not prove a dataset fair.
    """


def main() -> None:
    """Console-script entry point."""
    cli(prog_name="labelreview")


def _register() -> None:
    from labelreview.cli.decide import decide
    from labelreview.cli.lexicon import lexicon
    from labelreview.cli.log import log
    from labelreview.cli.review import review
    from labelreview.cli.scan import scan
    from labelreview.cli.setup import demo, init

    for command in (scan, lexicon, init, demo, review, decide, log):
        cli.add_command(command)
    from labelreview.cli.agreement import agreement
    from labelreview.cli.queue import queue

    cli.add_command(agreement)
    cli.add_command(queue)
    from labelreview.cli.apply import apply
    from labelreview.cli.export import export

    cli.add_command(apply)
    cli.add_command(export)
    from labelreview.cli.check import check
    from labelreview.cli.compare import compare
    from labelreview.cli.signoff import signoff

    for gate_command in (check, signoff, compare):
        cli.add_command(gate_command)


_register()

__all__ = ["EXIT_BAD_INPUT", "EXIT_FOUND", "cli", "handle_errors", "main"]
