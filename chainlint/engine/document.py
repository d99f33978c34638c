"""One document analysed again and again as it is edited (an editor's buffer): only what changed.

The text is cut into units: the module's top-level statements, with statements that share a
line, and consecutive assignments to one name (which may form a statement run), kept together.
What a unit's chains, plans and findings depend on, besides the settings (options, profile
store, the module's imports), is its own text, the line above it (a `# chainlint:` comment
there applies to a chain on its first line) and what the statements before it tell the finder
about the frames they assign. That is the unit's key. A unit whose key was seen in the last
analysis is reused, moved to its new line; the finder walks only the other units (its seams cut
to their lines), and only their chains are planned and checked. The result equals
`analyse_text` of the same text (a property test compares the two on random edits).
"""

from __future__ import annotations

import ast
import bisect
import hashlib
import re
import threading
from dataclasses import dataclass, replace
from functools import cached_property
from pathlib import Path
from typing import Any

from chainlint.engine.check import PlannedChain, apply_rules, check, plan_results
from chainlint.engine.options import Options
from chainlint.engine.run import analyse_source
from chainlint.model import FileAnalysis, FileProblem, Finding, Span
from chainlint.estimate.stores import LoadedStores
from chainlint.find.bindings import ModuleBindings, Resolved
from chainlint.find.chains import find_chains, module_names
from chainlint.find.origins import READERS, profile_comment
from chainlint.find.screen import Seams, find_seams
from chainlint.engine.reparse import Reparser
from chainlint.parse.source import DEFAULT_MAX_BYTES, SourceError, SourceText, size_error, text_source
from chainlint.profile.store import find_store


@dataclass(frozen=True)
class DocumentAnalysis:
    """Chains with their plans, findings in position order, errors (a syntax error), `refusal`:
    why the text was not analysed at all (its size over the limit), and `statements`: the lines
    of each top-level unit, when known (a fix is checked within its statement).

    Held as parts, each with the lines its results must still move by: reused results move
    only when they are read (findings at once for diagnostics, plans only for a hover or fix).
    """

    source: SourceText
    parts: tuple[tuple[int, tuple[PlannedChain, ...], tuple[Finding, ...]], ...] = ()
    errors: tuple[FileProblem, ...] = ()
    statements: tuple[tuple[int, int], ...] = ()
    refusal: str | None = None

    @cached_property
    def planned(self) -> tuple[PlannedChain, ...]:
        return tuple(p for delta, planned, _ in self.parts for p in _shift(planned, delta))

    @cached_property
    def findings(self) -> tuple[Finding, ...]:
        found = [f for delta, _, findings in self.parts for f in _shift(findings, delta)]
        return tuple(sorted(found, key=lambda f: (f.span.line, f.span.column, f.rule)))


def analyse_text(path: str, text: str, options: Options, max_bytes: int = DEFAULT_MAX_BYTES) -> DocumentAnalysis:
    """The whole analysis of one text, as `check` does it for a file."""
    source = text_source(path, text)
    refused = _size_refusal(source, max_bytes)
    if refused is not None:
        return refused
    result = analyse_source(source)
    checked = check([result], options)
    return DocumentAnalysis(source, ((0, checked.chains, checked.findings),), result.errors)


@dataclass(frozen=True)
class _Unit:
    """A unit's results, where it was, and what the module said before it about the names it
    reads (a digest per name) and in its walked compound statements."""

    first: int
    planned: tuple[PlannedChain, ...]
    findings: tuple[Finding, ...]
    depends: tuple[tuple[str, bytes | None], ...]
    compound: bytes
    identifiers: frozenset[str] | None = None
    resolved: tuple[tuple[str, Resolved], ...] = ()


class _Asking(ModuleBindings):
    """The module's bindings, noting whether the finder asked what a name holds."""

    asked = False

    def resolve(self, dotted: str, at: ast.AST | None) -> Resolved:
        self.asked = True
        return super().resolve(dotted, at)


def _resolved(bindings: ModuleBindings, identifiers: frozenset[str]) -> tuple[tuple[str, Resolved], ...]:
    """What each module-level name among `identifiers` holds (a free name in a filter may be
    one of them, or be defined in terms of them)."""
    module = bindings.scope(None).bindings.keys()
    return tuple((name, bindings.resolve(name, None)) for name in sorted(identifiers & module))


Key = tuple[str, int]


class DocumentAnalyser:
    """Analyses successive texts of one document; safe to call from several threads (one
    analysis at a time)."""

    def __init__(self, path: str, max_bytes: int = DEFAULT_MAX_BYTES, stores: LoadedStores | None = None) -> None:
        """`stores`: the profile stores, shared with the caller's other documents."""
        self.path = path
        self.max_bytes = max_bytes
        self._lock = threading.Lock()
        self._units: dict[Key, _Unit] = {}
        self._parser = Reparser()
        self._stores = LoadedStores() if stores is None else stores
        self._setting: tuple[Any, ...] | None = None

    def analyse(self, text: str, options: Options) -> DocumentAnalysis:
        with self._lock:
            return self._analyse(text_source(self.path, text), options)

    def _analyse(self, source: SourceText, options: Options) -> DocumentAnalysis:
        refused = _size_refusal(source, self.max_bytes)
        if refused is not None:
            return refused
        seams = find_seams(source.text)
        if seams.empty:
            return DocumentAnalysis(source)
        try:
            tree = self._parser.parse(source)
        except SourceError as error:
            return DocumentAnalysis(source, errors=(FileProblem(self.path, error.line, error.column, error.message),))
        store = (options.store or find_store(Path(self.path))).resolve()
        setting = (options, store, self._stores.load(store), module_names(tree), _imports(source, tree))
        if self._setting is None or any(a is not b and a != b for a, b in zip(setting, self._setting)):
            self._units = {}
            self._setting = setting
        units, stale = self._reusable(source, tree, seams)
        fresh: dict[int, _Unit] = {}
        if stale:
            self._parser.settle([statement for _, _, statements, _ in stale for statement in statements])
            asking = _Asking(tree)
            try:
                chains = find_chains(source, tree, seams.within([(first, last) for first, last, _, _ in stale]), asking)
            except SourceError as error:
                return DocumentAnalysis(source, errors=(FileProblem(self.path, error.line, error.column, error.message),))
            except RecursionError:
                return DocumentAnalysis(source, errors=(FileProblem(self.path, 1, 1, "nesting too deep to analyse"),))
            planned, _ = plan_results([FileAnalysis(self.path, chains=tuple(chains))], options, self._stores)
            findings, _ = apply_rules(planned, options)
            firsts = [first for first, _, _, _ in stale]
            chains_of: dict[int, list[PlannedChain]] = {first: [] for first in firsts}
            findings_of: dict[int, list[Finding]] = {first: [] for first in firsts}
            for item in planned:
                chains_of[firsts[bisect.bisect_right(firsts, item.chain.span.line) - 1]].append(item)
            for finding in findings:
                findings_of[firsts[bisect.bisect_right(firsts, finding.span.line) - 1]].append(finding)
            for first, last, statements, (names, compound) in stale:
                read = _names_read(source, first, last, statements, chains_of[first])
                depends = tuple((name, names.get(name)) for name in read)
                unit = _Unit(first, tuple(chains_of[first]), tuple(findings_of[first]), depends, compound)
                if asking.asked and chains_of[first]:
                    identifiers = frozenset(_IDENTIFIER.findall("".join(source.lines[first - 1 : last])))
                    unit = replace(unit, identifiers=identifiers, resolved=_resolved(asking, identifiers))
                fresh[first] = unit
        parts = []
        kept: dict[Key, _Unit] = {}
        for first, _, key, reused in units:
            unit = fresh[first] if reused is None else reused
            kept[key] = unit  # as analysed: each later analysis moves it from there
            if unit.planned or unit.findings:
                parts.append((first - unit.first, unit.planned, unit.findings))
        self._units = kept
        return DocumentAnalysis(source, tuple(parts), statements=tuple((first, last) for first, last, _, _ in units))

    def _reusable(self, source: SourceText, tree: ast.Module, seams: Seams):  # type: ignore[no-untyped-def]
        """Every unit as (first line, last line, key, reusable result or None), and the units to analyse
        as (first line, last line, statements, what the module said before them).

        The module's word on a name is a digest of the assignments to it so far (what the finder
        records about a frame or a path); a compound statement the finder walks (a seam meets
        it, perhaps one that starts in the next unit) may assign anything, so it is walked
        every time and its text counts for every later unit.
        """
        units = []
        stale = []
        names: dict[str, bytes] = {}
        compound = b""
        seen: dict[str, int] = {}
        starts, text = source.line_starts, source.text
        bindings: ModuleBindings | None = None
        for first, last, statements in _groups(tree):
            begin = starts[first - 2] if first > 1 else 0
            end = starts[last] if last < len(starts) else len(text)
            content = text[begin:end]  # with the line above: a `# chainlint:` comment there counts
            seen[content] = seen.get(content, -1) + 1  # identical units are told apart by their rank
            key = (content, seen[content])
            walks = seams.meets(first, last)
            always = walks and any(isinstance(s, _COMPOUND) for s in statements)
            unit = self._units.get(key)
            if unit is not None and unit.identifiers is not None:
                bindings = bindings or ModuleBindings(tree)
                if _resolved(bindings, unit.identifiers) != unit.resolved:
                    unit = None
            if always or unit is None or unit.compound != compound or any(names.get(n) != d for n, d in unit.depends):
                unit = None
                stale.append((first, last, statements, (dict(names), compound)))
            units.append((first, last, key, unit))
            for statement in statements:
                if isinstance(statement, _COMPOUND):
                    if walks:
                        compound = _digest(compound, _text(source, statement))
                    continue
                told = _assigns(source, statement, names)
                if told is not None:
                    names[told[0]] = _digest(names.get(told[0], b""), told[1])
        return units, stale


def _size_refusal(source: SourceText, max_bytes: int) -> DocumentAnalysis | None:
    size = len(source.text) if len(source.text) * 4 <= max_bytes else len(source.text.encode("utf-8", "surrogatepass"))
    message = size_error(size, max_bytes)
    return None if message is None else DocumentAnalysis(source, refusal=message)


def _groups(tree: ast.Module) -> list[tuple[int, int, list[ast.stmt]]]:
    """Top-level statements as units: (first line, last line, statements)."""
    groups: list[tuple[int, int, list[ast.stmt]]] = []
    for statement in tree.body:
        decorators = getattr(statement, "decorator_list", ())
        first = min([statement.lineno] + [d.lineno for d in decorators])
        last = statement.end_lineno or statement.lineno
        if groups and (first <= groups[-1][1] or _same_target(groups[-1][2][-1], statement)):
            groups[-1] = (groups[-1][0], max(groups[-1][1], last), [*groups[-1][2], statement])
        else:
            groups.append((first, last, [statement]))
    return groups


def _names_read(source: SourceText, first: int, last: int, statements: list[ast.stmt],
                planned: list[PlannedChain]) -> list[str]:
    """The module-level names a unit's results may depend on: the frames its chains start
    from, and, when it calls a reader, every name it reads (a path constant)."""
    if not planned:
        return []  # no chain: nothing before it can give it one
    names = {p.chain.origin.name for p in planned if p.chain.origin is not None}
    text = "".join(source.lines[first - 1 : last])
    if any(reader in text for reader in READERS):
        names.update(node.id for statement in statements for node in ast.walk(statement) if isinstance(node, ast.Name))
    return sorted(names)


def _imports(source: SourceText, tree: ast.Module) -> tuple[str, ...]:
    """The module-level imports (within top-level blocks too): which module a name stands for."""
    found = []
    for statement in tree.body:
        nodes = ast.walk(statement) if isinstance(statement, _COMPOUND) else (statement,)
        found.extend(_text(source, node) for node in nodes if isinstance(node, (ast.Import, ast.ImportFrom)))
    return tuple(found)


def _digest(before: bytes, text: str) -> bytes:
    return hashlib.blake2b(before + text.encode("utf-8", "surrogatepass"), digest_size=16).digest()


def _text(source: SourceText, statement: ast.stmt) -> str:
    return source.segment((statement.lineno, statement.col_offset), (statement.end_lineno, statement.end_col_offset))  # type: ignore[arg-type]


def _same_target(before: ast.stmt, statement: ast.stmt) -> bool:
    def target(node: ast.stmt) -> str | None:
        if isinstance(node, ast.Assign) and len(node.targets) == 1 and isinstance(node.targets[0], ast.Name):
            return node.targets[0].id
        return None

    return target(before) is not None and target(before) == target(statement)


def _assigns(source: SourceText, statement: ast.stmt, names: dict[str, bytes]) -> tuple[str, str] | None:
    """(name, what the finder learns) for a top-level `name = ...`: from a string or a reader
    call, the statement's text and what the names it reads stood for (a path constant);
    otherwise only the `# chainlint: profile=` comments on its lines (the finder records an
    assigned frame and such a comment, nothing else)."""
    if not (isinstance(statement, ast.Assign) and len(statement.targets) == 1 and isinstance(statement.targets[0], ast.Name)):
        return None
    value = statement.value
    read = isinstance(value, ast.Call) and isinstance(value.func, ast.Attribute) and value.func.attr in READERS
    if read or (isinstance(value, ast.Constant) and isinstance(value.value, str)):
        read = sorted({n.id for n in ast.walk(value) if isinstance(n, ast.Name)})
        return statement.targets[0].id, "text:" + _text(source, statement) + repr([names.get(n) for n in read])
    lines = source.lines[statement.lineno - 1 : statement.end_lineno]
    return statement.targets[0].id, repr([profile_comment(line) for line in lines])


_IDENTIFIER = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_COMPOUND = (ast.If, ast.For, ast.AsyncFor, ast.While, ast.With, ast.AsyncWith, ast.Try, ast.TryStar, ast.Match)
def _span(span: Span | None, delta: int) -> Span | None:
    return None if span is None else Span(span.line + delta, span.column, span.end_line + delta, span.end_column)


def _moved(value: Any, **changes: Any) -> Any:
    """A copy of a frozen dataclass with some fields changed, without running its checks again."""
    copy = object.__new__(type(value))
    copy.__dict__.update(value.__dict__)
    copy.__dict__.update(changes)
    return copy


def _shift(items: tuple[Any, ...], delta: int) -> tuple[Any, ...]:
    """Planned chains or findings with every line moved by `delta` (a unit moves by whole lines)."""
    if not delta:
        return items
    moved = []
    for item in items:
        if isinstance(item, Finding):
            moved.append(_moved(item, span=_span(item.span, delta)))
            continue
        chain = item.chain
        steps = tuple(_moved(s, span=_span(s.span, delta), mask_span=_span(s.mask_span, delta)) for s in chain.steps)
        chain = _moved(chain, span=_span(chain.span, delta), steps=steps)
        plan = None if item.plan is None else _moved(item.plan, chain=chain)
        moved.append(_moved(item, chain=chain, plan=plan))
    return tuple(moved)
