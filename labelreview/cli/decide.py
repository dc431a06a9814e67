"""``labelreview decide``: record a decision (or a batch of them) without the review app."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import click
import yaml

from labelreview.cli._common import handle_errors, note
from labelreview.errors import LabelReviewError, UsageError

_BATCH_KEYS = ("curator", "decisions")
_ITEM_KEYS = ("label", "action", "new_label", "fallback", "reason")


class BatchError(LabelReviewError):
    """A batch decision file is malformed."""


@click.command("decide")
@click.argument("label", required=False)
@click.argument(
    "dataset_dir", required=False, default=".", type=click.Path(file_okay=False, path_type=Path)
)
@click.option("--accept", "accept", is_flag=True, help="Keep the label as it is.")
@click.option("--rename", "rename", metavar="NEW", help="Rename the label to NEW.")
@click.option("--retire", "retire", is_flag=True, help="Remove the label from the taxonomy.")
@click.option(
    "--fallback",
    metavar="LABEL",
    help="With --retire: move its annotations to LABEL instead of dropping them.",
)
@click.option("--reason", help="Why (required; at least decisions.min_reason_length characters).")
@click.option("--curator", help="Who decides (default: the config's curator, else the OS user).")
@click.option(
    "--from",
    "batch",
    type=click.Path(dir_okay=False, path_type=Path),
    help="A YAML file of decisions to record together (all or none).",
)
@click.option("--annotations", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--taxonomy", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--encoding", help="Text encoding of the input files (default UTF-8).")
@handle_errors
def decide(
    label: str | None,
    dataset_dir: Path,
    accept: bool,
    rename: str | None,
    retire: bool,
    fallback: str | None,
    reason: str | None,
    curator: str | None,
    batch: Path | None,
    annotations: Path | None,
    taxonomy: Path | None,
    encoding: str | None,
) -> None:
    """Accept, rename or retire LABEL in DATASET_DIR (default: the current folder), with a reason.

    \b
      labelreview decide LABEL [DATASET_DIR] --accept --reason TEXT
      labelreview decide LABEL [DATASET_DIR] --rename NEW --reason TEXT
      labelreview decide LABEL [DATASET_DIR] --retire [--fallback L] --reason TEXT
      labelreview decide --from FILE.yaml [DATASET_DIR]

    Each decision is checked by the same rules as in the review app, then appended to the
    decision log and synced to disk before this command reports it saved.
    """
    from labelreview.review import DecisionRequest, ReviewSession

    if batch is not None:
        if any((accept, rename, retire, fallback, reason)):
            raise UsageError("--from takes its decisions from the file; drop the other options")
        if label is not None and dataset_dir == Path("."):
            dataset_dir = Path(label)  # `decide --from FILE DIR`: the one argument is the folder
        elif label is not None:
            raise UsageError("--from takes no LABEL argument", hint="Put labels in the file.")
        requests, file_curator = read_batch(batch)
        curator = curator or file_curator
    else:
        if label is None:
            raise UsageError(
                "give a LABEL and one of --accept, --rename NEW, --retire (or --from FILE)"
            )
        options = (("accept", accept), ("rename", rename is not None), ("retire", retire))
        chosen = [name for name, on in options if on]
        if len(chosen) != 1:
            raise UsageError("choose exactly one of --accept, --rename NEW, --retire")
        if fallback and not retire:
            raise UsageError("--fallback goes with --retire")
        if reason is None:
            raise UsageError("--reason is required: say why, for the record")
        requests = [
            DecisionRequest(
                label=label,
                action=chosen[0],
                reason=reason,
                new_label=rename,
                fallback=fallback,
            )
        ]
    session = ReviewSession.open(
        dataset_dir,
        curator=curator,
        annotations=annotations,
        taxonomy=taxonomy,
        encoding=encoding,
    )
    for line in session.scanned.notes:
        note(line if line.startswith("warning:") else f"note: {line}")
    checks = [session.check(r) for r in requests]
    entries = session.decide_many(requests)
    for check, entry in zip(checks, entries, strict=True):
        for warning in check.warnings:
            note(f"warning: {check.request.label}: {warning}")
        click.echo(f"recorded seq {entry.seq}: {describe_decision(entry.data)}")
    state = session.state()
    done, total = session.progress()
    click.echo(
        f"log {session.log.path} head {state.head[:12]}; {done} of {total} flagged labels decided"
    )


def describe_decision(data: dict[str, Any]) -> str:
    """``rename 'a' -> 'b' (merge) by mira: <reason>`` and the like."""
    action = data.get("action")
    label = data.get("label")
    if action == "rename":
        what = f"rename '{label}' -> '{data.get('new_label')}'"
        if data.get("merge"):
            what += " (merge into an existing label)"
    elif action == "retire":
        target = data.get("fallback")
        what = f"retire '{label}'" + (
            f", annotations move to '{target}'" if target else ", annotations dropped"
        )
    else:
        what = f"accept '{label}'"
    return f"{what} by {data.get('curator')}: {data.get('reason')}"


def read_batch(path: Path) -> tuple[list[Any], str | None]:
    """Read a batch file into DecisionRequests, each remembering its file and line.

    The file is a mapping with ``decisions:`` (a list of mappings with ``label``, ``action``
    and ``reason``; ``new_label`` for renames; ``fallback`` for retirements) and an optional
    ``curator:``.
    """
    from labelreview._yaml import compose
    from labelreview.review import DecisionRequest

    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise BatchError("the file does not exist", source=str(path)) from None
    except UnicodeDecodeError as exc:
        raise BatchError(f"not UTF-8 text (byte {exc.start + 1})", source=str(path)) from None
    except OSError as exc:
        raise BatchError(f"cannot read the file: {exc.strerror}", source=str(path)) from None
    tree = compose(path, text, BatchError)

    def fail(node: yaml.Node, message: str) -> BatchError:
        return BatchError(
            message,
            source=str(path),
            line=node.start_mark.line + 1,
            column=node.start_mark.column + 1,
        )

    if not isinstance(tree, yaml.MappingNode):
        raise BatchError(
            "a batch file must be a mapping with a 'decisions' list", source=str(path), line=1
        )
    top = _mapping(tree, _BATCH_KEYS, fail)
    curator = None
    if "curator" in top:
        curator = _scalar(top["curator"], "curator", fail)
    if "decisions" not in top:
        raise fail(tree, "the batch file has no 'decisions' list")
    listing = top["decisions"]
    if not isinstance(listing, yaml.SequenceNode) or not listing.value:
        raise fail(listing, "'decisions' must be a non-empty list")
    requests = []
    for node in listing.value:
        if not isinstance(node, yaml.MappingNode):
            raise fail(node, "each decision must be a mapping (label, action, reason, ...)")
        item = _mapping(node, _ITEM_KEYS, fail)
        for key in ("label", "action", "reason"):
            if key not in item:
                raise fail(node, f"this decision has no '{key}'")
        requests.append(
            DecisionRequest(
                label=_scalar(item["label"], "label", fail),
                action=_scalar(item["action"], "action", fail),
                reason=_scalar(item["reason"], "reason", fail),
                new_label=_scalar(item["new_label"], "new_label", fail)
                if "new_label" in item
                else None,
                fallback=_scalar(item["fallback"], "fallback", fail)
                if "fallback" in item
                else None,
                source=f"{path} line {node.start_mark.line + 1}",
            )
        )
    return requests, curator


def _mapping(node: yaml.MappingNode, allowed: tuple[str, ...], fail: Any) -> dict[str, yaml.Node]:
    out: dict[str, yaml.Node] = {}
    for key_node, value_node in node.value:
        key = key_node.value if isinstance(key_node, yaml.ScalarNode) else None
        if key not in allowed:
            raise fail(key_node, f"unknown key {key!r}; known keys: {', '.join(allowed)}")
        if key in out:
            raise fail(key_node, f"key '{key}' appears twice")
        out[str(key)] = value_node
    return out


def _scalar(node: yaml.Node, key: str, fail: Any) -> str:
    if not isinstance(node, yaml.ScalarNode) or not str(node.value).strip():
        raise fail(node, f"'{key}' must be non-empty text")
    return str(node.value)
