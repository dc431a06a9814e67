"""Lexicons: YAML files curators edit -> one validated, layered :class:`Lexicon`.

The shipped base set lives in ``lexicons/base/``; an organisation layer and a per-dataset layer
may follow (``lexicons.layers`` in the dataset config). Every category and term remembers the
file and line it came from, so a problem or a finding can point back to it. The set's content
hash (SHA-256 over a canonical JSON form of the effective entries) is what the audit trail
records: editing a comment or moving a term does not change it, changing what is flagged does.

The schema is our own and is documented in ``lexicons/README.md``.
"""

from __future__ import annotations

import codecs
import hashlib
import json
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import yaml

from labelreview._gc import paused_gc
from labelreview._resources import lexicons_dir
from labelreview._yaml import compose
from labelreview.errors import LexiconError
from labelreview.model import SEVERITIES
from labelreview.text import fold, term_tokens

SCHEMA_VERSION = 1
FORMS = ("noun", "modifier")
SCOPES = ("people", "always")
ENCODINGS = ("plain", "rot13")

_FILE_KEYS = {
    "schema",
    "encoding",
    "categories",
    "terms",
    "disable_terms",
    "add_exceptions",
    "allow_labels",
    "layer",
    "description",
}
_CATEGORY_KEYS = {"id", "title", "severity", "rationale"}
_TERM_KEYS = {
    "term",
    "category",
    "form",
    "scope",
    "variants",
    "suggestions",
    "exceptions",
    "severity",
    "note",
}


@dataclass(frozen=True)
class Category:
    """A kind of judgement, e.g. ``character_judgement``."""

    id: str
    title: str
    severity: str
    rationale: str
    source: str
    """``file:line`` where it is defined."""


@dataclass(frozen=True)
class Term:
    """One lexicon entry: a word or phrase and everything needed to explain a match."""

    term: str
    category: str
    form: str
    scope: str
    variants: tuple[str, ...]
    suggestions: tuple[str, ...]
    exceptions: tuple[str, ...]
    severity: str
    """Effective severity: the term's own, else its category's."""
    note: str
    source: str
    """``file:line`` of the entry."""

    @property
    def key(self) -> tuple[str, ...]:
        """The normalised tokens that identify this term across layers."""
        return term_tokens(self.term)

    def canonical(self) -> dict[str, Any]:
        return {
            "term": self.term,
            "category": self.category,
            "form": self.form,
            "scope": self.scope,
            "variants": sorted(self.variants),
            "suggestions": list(self.suggestions),
            "exceptions": sorted(self.exceptions),
            "severity": self.severity,
        }


@dataclass(frozen=True)
class Problem:
    """One thing wrong with a lexicon file."""

    file: str
    line: int | None
    message: str
    level: str = "error"
    """``error`` (the set cannot be used) or ``warning``."""

    def __str__(self) -> str:
        where = f"{self.file}:{self.line}" if self.line else self.file
        return f"{where}: {self.level}: {self.message}"


@dataclass(frozen=True)
class Lexicon:
    """The effective lexicon after all layers are applied."""

    categories: dict[str, Category]
    terms: tuple[Term, ...]
    allow_labels: frozenset[str] = frozenset()
    """Folded labels that are never flagged (from dataset layers)."""
    files: tuple[str, ...] = ()
    warnings: tuple[Problem, ...] = ()
    content_hash: str = field(default="")


def builtin_files() -> list[Path]:
    """The shipped base lexicon files, in the order they are applied."""
    return sorted((lexicons_dir() / "base").glob("*.yaml"))


# ---------------------------------------------------------------------------------------------
# YAML with line numbers


class _Marked:
    """Mixin carrying the 1-based line of a YAML node and of each mapping key / list item."""

    line: int
    lines: dict[Any, int]


class _MDict(dict[str, Any], _Marked):
    pass


class _MList(list[Any], _Marked):
    pass


_STR_TAG = "tag:yaml.org,2002:str"


def _construct(node: yaml.Node, path: str, scalars: yaml.constructor.SafeConstructor) -> Any:
    if isinstance(node, yaml.MappingNode):
        out = _MDict()
        out.line = node.start_mark.line + 1
        out.lines = {}
        for key_node, value_node in node.value:
            key = _construct(key_node, path, scalars)
            if not isinstance(key, str):
                raise LexiconError(
                    "keys must be text", source=path, line=key_node.start_mark.line + 1
                )
            if key in out:
                raise LexiconError(
                    f"key '{key}' appears twice in the same entry",
                    source=path,
                    line=key_node.start_mark.line + 1,
                )
            out[key] = _construct(value_node, path, scalars)
            out.lines[key] = key_node.start_mark.line + 1
        return out
    if isinstance(node, yaml.SequenceNode):
        seq = _MList()
        seq.line = node.start_mark.line + 1
        seq.lines = {}
        for i, item in enumerate(node.value):
            seq.append(_construct(item, path, scalars))
            seq.lines[i] = item.start_mark.line + 1
        return seq
    if node.tag == _STR_TAG:
        # What SafeConstructor.construct_yaml_str returns for a text scalar. 29,000 of the
        # shipped set's 34,000 nodes are text; going through construct_object took 0.108 s
        # for the set against 0.093 s this way (medians of 15, collector paused).
        return node.value
    return scalars.construct_object(node, deep=True)


def _read_yaml(path: Path) -> Any:
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise LexiconError("lexicon file not found", source=str(path)) from None
    except UnicodeDecodeError as exc:
        raise LexiconError(
            f"not valid UTF-8 (byte {exc.start})",
            source=str(path),
            hint="Lexicon files must be saved as UTF-8.",
        ) from None
    node = compose(path, text, LexiconError)
    if node is None:
        return None
    # One constructor per file: a constructor remembers every node it has built (for YAML
    # aliases), so a shared one kept each load's nodes alive for the life of the process.
    return _construct(node, str(path), yaml.constructor.SafeConstructor())


# ---------------------------------------------------------------------------------------------
# Reading one file


@dataclass
class _FileContent:
    path: str
    categories: list[Category] = field(default_factory=list)
    terms: list[Term] = field(default_factory=list)
    disable: list[tuple[str, int]] = field(default_factory=list)
    add_exceptions: list[tuple[str, list[str], int]] = field(default_factory=list)
    allow_labels: list[str] = field(default_factory=list)


def _line(container: Any, key: Any) -> int | None:
    lines = getattr(container, "lines", None)
    if lines and key in lines:
        return int(lines[key])
    return getattr(container, "line", None)


def _str_list(
    value: Any, what: str, path: str, line: int | None, problems: list[Problem]
) -> list[str]:
    if value is None:
        return []
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        problems.append(Problem(path, line, f"'{what}' must be a list of text values"))
        return []
    return [v.strip() for v in value if v.strip()]


def _parse_file(
    path: Path, problems: list[Problem], categories: dict[str, Category]
) -> _FileContent:
    spath = _display(path)
    data = _read_yaml(path)
    content = _FileContent(spath)
    if data is None:
        problems.append(Problem(spath, None, "file is empty", "warning"))
        return content
    if not isinstance(data, dict):
        problems.append(Problem(spath, getattr(data, "line", 1), "top level must be a mapping"))
        return content
    for key in data:
        if key not in _FILE_KEYS:
            problems.append(
                Problem(
                    spath,
                    _line(data, key),
                    f"unknown key '{key}'; allowed: {', '.join(sorted(_FILE_KEYS))}",
                )
            )
    schema = data.get("schema", SCHEMA_VERSION)
    if schema != SCHEMA_VERSION:
        problems.append(
            Problem(
                spath, _line(data, "schema"), f"schema {schema!r} is not supported; use schema: 1"
            )
        )
    encoding = data.get("encoding", "plain")
    if encoding not in ENCODINGS:
        problems.append(
            Problem(
                spath,
                _line(data, "encoding"),
                f"encoding {encoding!r} is not one of: {', '.join(ENCODINGS)}",
            )
        )
        encoding = "plain"

    def dec(s: str) -> str:
        return codecs.decode(s, "rot13") if encoding == "rot13" else s

    for i, raw in enumerate(data.get("categories") or []):
        line = _line(data["categories"], i)
        if not isinstance(raw, dict):
            problems.append(Problem(spath, line, "each category must be a mapping"))
            continue
        for key in raw:
            if key not in _CATEGORY_KEYS:
                problems.append(
                    Problem(
                        spath,
                        _line(raw, key),
                        f"unknown key '{key}' in category; allowed: "
                        f"{', '.join(sorted(_CATEGORY_KEYS))}",
                    )
                )
        cid = raw.get("id")
        if not isinstance(cid, str) or not cid:
            problems.append(Problem(spath, line, "category has no 'id'"))
            continue
        sev = raw.get("severity")
        if sev not in SEVERITIES:
            problems.append(
                Problem(
                    spath,
                    _line(raw, "severity"),
                    f"category '{cid}' has severity {sev!r}; use one of: {', '.join(SEVERITIES)}",
                )
            )
            sev = "medium"
        if cid in categories:
            problems.append(
                Problem(
                    spath, line, f"category '{cid}' is already defined at {categories[cid].source}"
                )
            )
            continue
        cat = Category(
            id=cid,
            title=str(raw.get("title") or cid.replace("_", " ")),
            severity=str(sev),
            rationale=str(raw.get("rationale") or "").strip(),
            source=f"{spath}:{line}",
        )
        if not cat.rationale:
            problems.append(Problem(spath, line, f"category '{cid}' has no 'rationale'", "warning"))
        categories[cid] = cat
        content.categories.append(cat)

    terms_raw = data.get("terms") or []
    if not isinstance(terms_raw, list):
        problems.append(Problem(spath, _line(data, "terms"), "'terms' must be a list"))
        terms_raw = []
    for i, raw in enumerate(terms_raw):
        line = _line(terms_raw, i)
        if not isinstance(raw, dict):
            problems.append(
                Problem(spath, line, "each term must be a mapping with at least 'term'")
            )
            continue
        bad = False
        for key in raw:
            if key not in _TERM_KEYS:
                problems.append(
                    Problem(
                        spath,
                        _line(raw, key),
                        f"unknown key '{key}' in term; allowed: {', '.join(sorted(_TERM_KEYS))}",
                    )
                )
        text = raw.get("term")
        if not isinstance(text, str) or not text.strip():
            problems.append(Problem(spath, line, "entry has no 'term'"))
            continue
        text = dec(text.strip())
        shown = text if encoding == "plain" else raw["term"]
        cid = raw.get("category")
        if not isinstance(cid, str) or not cid:
            problems.append(
                Problem(
                    spath,
                    line,
                    f"entry '{shown}' has no 'category'. Add one of: "
                    f"{', '.join(sorted(categories))}",
                )
            )
            continue
        if cid not in categories:
            problems.append(
                Problem(
                    spath,
                    _line(raw, "category"),
                    f"entry '{shown}' names unknown category '{cid}'. Use one of: "
                    f"{', '.join(sorted(categories))}",
                )
            )
            continue
        form = raw.get("form", "noun")
        if form not in FORMS:
            problems.append(
                Problem(
                    spath,
                    _line(raw, "form"),
                    f"entry '{shown}' has form {form!r}; use one of: {', '.join(FORMS)}",
                )
            )
            bad = True
        scope = raw.get("scope", "people")
        if scope not in SCOPES:
            problems.append(
                Problem(
                    spath,
                    _line(raw, "scope"),
                    f"entry '{shown}' has scope {scope!r}; use one of: {', '.join(SCOPES)}",
                )
            )
            bad = True
        sev = raw.get("severity", categories[cid].severity)
        if sev not in SEVERITIES:
            problems.append(
                Problem(
                    spath,
                    _line(raw, "severity"),
                    f"entry '{shown}' has severity {sev!r}; use one of: {', '.join(SEVERITIES)}",
                )
            )
            bad = True
        if not term_tokens(text):
            problems.append(Problem(spath, line, f"entry '{shown}' has no words to match"))
            bad = True
        if bad:
            continue
        content.terms.append(
            Term(
                term=fold(text),
                category=cid,
                form=str(form),
                scope=str(scope),
                variants=tuple(
                    dec(v)
                    for v in _str_list(
                        raw.get("variants"), "variants", spath, _line(raw, "variants"), problems
                    )
                ),
                suggestions=tuple(
                    _str_list(
                        raw.get("suggestions"),
                        "suggestions",
                        spath,
                        _line(raw, "suggestions"),
                        problems,
                    )
                ),
                exceptions=tuple(
                    dec(v)
                    for v in _str_list(
                        raw.get("exceptions"),
                        "exceptions",
                        spath,
                        _line(raw, "exceptions"),
                        problems,
                    )
                ),
                severity=str(sev),
                note=str(raw.get("note") or ""),
                source=f"{spath}:{line}",
            )
        )

    for i, name in enumerate(
        _str_list(
            data.get("disable_terms"),
            "disable_terms",
            spath,
            _line(data, "disable_terms"),
            problems,
        )
    ):
        content.disable.append((dec(name), _line(data["disable_terms"], i) or 0))
    extra = data.get("add_exceptions") or {}
    if not isinstance(extra, dict):
        problems.append(
            Problem(
                spath,
                _line(data, "add_exceptions"),
                "'add_exceptions' must map a term to a list of phrases",
            )
        )
        extra = {}
    for name, phrases in extra.items():
        ln = _line(extra, name) or 0
        content.add_exceptions.append(
            (
                dec(name),
                [dec(p) for p in _str_list(phrases, "add_exceptions", spath, ln, problems)],
                ln,
            )
        )
    content.allow_labels.extend(
        _str_list(
            data.get("allow_labels"), "allow_labels", spath, _line(data, "allow_labels"), problems
        )
    )
    return content


# ---------------------------------------------------------------------------------------------
# Layers


def _display(path: Path) -> str:
    """Show shipped files relative to the lexicons folder, user files as given."""
    try:
        return str(Path("lexicons") / path.resolve().relative_to(lexicons_dir().resolve()))
    except ValueError:
        return str(path)


def collect_problems(
    layers: Sequence[Path | str] = (), base: Path | str | None = "builtin"
) -> tuple[Lexicon | None, list[Problem]]:
    """Read and merge every layer; return the lexicon (None on errors) and all problems found.

    Args:
        layers: Organisation and dataset layer files, applied in this order after the base.
        base: ``"builtin"`` for the shipped set, a folder of YAML files replacing it, or None
            for no base (a layer-only lexicon).

    Returns:
        The merged lexicon, or None when any error was found, and the list of problems.
    """
    # The shipped set is about 35,000 YAML nodes and 2,500 entries; with the collector running
    # this took 0.19-0.39 s after the review app's imports, paused 0.12 s (measured 2026-12-03).
    with paused_gc():
        return _collect_problems(layers, base)


def _collect_problems(
    layers: Sequence[Path | str], base: Path | str | None
) -> tuple[Lexicon | None, list[Problem]]:
    if base == "builtin":
        base_files = builtin_files()
    elif base is None:
        base_files = []
    else:
        base_path = Path(base)
        if not base_path.is_dir():
            raise LexiconError("lexicon base folder not found", source=str(base_path))
        base_files = sorted(base_path.glob("*.yaml"))
    files = [*base_files, *(Path(p) for p in layers)]
    problems: list[Problem] = []
    categories: dict[str, Category] = {}
    active: dict[tuple[str, ...], Term] = {}
    allow: set[str] = set()
    for path in files:
        shown = _display(path)
        try:
            content = _parse_file(path, problems, categories)
        except LexiconError as exc:
            problems.append(
                Problem(_display(Path(exc.source)) if exc.source else shown, exc.line, exc.message)
            )
            continue
        content_terms = [
            Term(**{**t.__dict__, "source": t.source.replace(str(path), shown, 1)})
            for t in content.terms
        ]
        for name, line in content.disable:
            key = term_tokens(name)
            if key in active:
                del active[key]
            else:
                problems.append(
                    Problem(
                        shown, line, f"disable_terms names '{name}', which no earlier layer defines"
                    )
                )
        for name, phrases, line in content.add_exceptions:
            key = term_tokens(name)
            if key not in active:
                problems.append(
                    Problem(
                        shown,
                        line,
                        f"add_exceptions names '{name}', which no earlier layer defines",
                    )
                )
                continue
            old = active[key]
            active[key] = Term(**{**old.__dict__, "exceptions": (*old.exceptions, *phrases)})
        for term in content_terms:
            key = term.key
            if key in active:
                other = active[key]
                line_no = int(term.source.rsplit(":", 1)[1])
                if other.category == term.category:
                    problems.append(
                        Problem(
                            shown,
                            line_no,
                            f"term '{term.term}' is listed twice in category '{term.category}' "
                            f"(first at {other.source}); the first entry is used",
                            "warning",
                        )
                    )
                else:
                    problems.append(
                        Problem(
                            shown,
                            line_no,
                            f"term '{term.term}' is already in category '{other.category}' at "
                            f"{other.source}; a term belongs to one category (use disable_terms "
                            f"in a later layer to replace it)",
                        )
                    )
                continue
            active[key] = term
        allow.update(fold(a) for a in content.allow_labels)
    # variants that collide with another term's own words
    owner: dict[tuple[str, ...], Term] = dict(active)
    for term in active.values():
        for variant in term.variants:
            vkey = term_tokens(variant)
            clash = owner.get(vkey)
            if clash is not None and clash is not term:
                problems.append(
                    Problem(
                        term.source.rsplit(":", 1)[0],
                        int(term.source.rsplit(":", 1)[1]),
                        f"variant '{variant}' of '{term.term}' is also the term or a variant of "
                        f"'{clash.term}' ({clash.source}); keep it in one entry",
                        "warning" if clash.category == term.category else "error",
                    )
                )
            else:
                owner[vkey] = term
    errors = [p for p in problems if p.level == "error"]
    if errors:
        return None, problems
    terms = tuple(sorted(active.values(), key=lambda t: (t.category, t.term)))
    lex = Lexicon(
        categories=dict(sorted(categories.items())),
        terms=terms,
        allow_labels=frozenset(allow),
        files=tuple(_display(p) for p in files),
        warnings=tuple(p for p in problems if p.level != "error"),
        content_hash=content_hash(categories.values(), terms, allow),
    )
    return lex, problems


def content_hash(
    categories: Iterable[Category], terms: Iterable[Term], allow_labels: Iterable[str] = ()
) -> str:
    """SHA-256 over canonical JSON of what the lexicon flags (not where it is written)."""
    payload = {
        "schema": SCHEMA_VERSION,
        "categories": sorted(
            ({"id": c.id, "severity": c.severity, "title": c.title} for c in categories),
            key=lambda c: c["id"],
        ),
        "terms": sorted((t.canonical() for t in terms), key=lambda t: (t["category"], t["term"])),
        "allow_labels": sorted(allow_labels),
    }
    blob = json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return "sha256:" + hashlib.sha256(blob.encode("utf-8")).hexdigest()


def load_lexicon(layers: Sequence[Path | str] = (), base: Path | str | None = "builtin") -> Lexicon:
    """Load the base set plus layers, raising on the first error.

    Raises:
        LexiconError: naming the file and line of the first problem.
    """
    lex, problems = collect_problems(layers, base)
    if lex is None:
        first = next(p for p in problems if p.level == "error")
        more = sum(1 for p in problems if p.level == "error") - 1
        raise LexiconError(
            first.message,
            source=first.file,
            line=first.line,
            hint=(
                f"({more} more problem(s); run `labelreview lexicon check` to list them all.)"
                if more
                else None
            ),
        )
    return lex
