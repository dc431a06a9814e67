"""``labelreview lexicon check``: validate lexicon layers and print the set's content hash."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from labelreview.cli._common import EXIT_BAD_INPUT, err, handle_errors


@click.group("lexicon")
def lexicon() -> None:
    """Validate and describe lexicon files."""


@lexicon.command("check")
@click.argument("files", nargs=-1, type=click.Path(dir_okay=False, path_type=Path))
@click.option(
    "--no-base",
    is_flag=True,
    help="Check FILES on their own, without the shipped base set before them.",
)
@handle_errors
def lexicon_check(files: tuple[Path, ...], no_base: bool) -> None:
    """Validate the shipped lexicon set plus FILES (layers, applied in order).

    Reports file:line for every problem and prints the set's content hash, which the audit
    trail records. Exit code 2 when any error is found.
    """
    from labelreview.scan import validate_lexicon

    lex, problems = validate_lexicon(list(files), base=None if no_base else "builtin")
    for problem in problems:
        err(str(problem))
    errors = [p for p in problems if p.level == "error"]
    if lex is None or errors:
        err(f"labelreview: {len(errors)} error(s) in the lexicon set")
        sys.exit(EXIT_BAD_INPUT)
    click.echo(
        f"{len(lex.terms)} terms in {len(lex.categories)} categories from "
        f"{len(lex.files)} files; {len(problems)} warning(s)"
    )
    for cid, cat in lex.categories.items():
        n = sum(1 for t in lex.terms if t.category == cid)
        click.echo(f"  {cid:28} {cat.severity:6} {n:5} terms")
    click.echo(f"content hash: {lex.content_hash}")
