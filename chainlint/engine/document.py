"""One document analysed again and again as it is edited (an editor's buffer): only what changed.

The text is cut into units: the module's top-level statements, with statements that share a
line, and consecutive assignments to one name, kept together. A unit's chains depend, besides
the settings (options, profile store, the module's imports), on its own text, the screen's
seams over its lines, the line above when a chain starts on its first line, what the module's
names it mentions were assigned from before it and what they hold; and, for a unit of
statements, on more of the module: a statement run steps over other statements, a name read
anywhere stops a step, a mask bound once applies further down. So a unit of statements is
`shared` when one of its statements belongs to a statement run, binds a mask, or is a block
(`if`, `for`, ...), or when it mentions a name bound to a mask before it; a shared unit is
walked every time. Any other unit whose text was seen in the last analysis, and all of the
above with it, is reused, moved to its new line; the finder still passes every top-level
statement (what names were assigned from, the masks, the runs: each statement's names are
kept from one analysis to the next, `find.runs.Memo`) but walks only the other units, and only
their chains are planned and checked. The result equals `analyse_text` of the same text (a
property test compares the two on random edits).
"""

from __future__ import annotations

import ast
import bisect
import re
import threading
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import Any

from chainlint.engine.check import PlannedChain, apply_rules, check, plan_results
from chainlint.engine.options import Options
from chainlint.engine.run import analyse_source
from chainlint.model import Chain, FileAnalysis, FileProblem, Finding, FrameOrigin
from chainlint.estimate.stores import LoadedStores
from chainlint.find.bindings import ModuleBindings, Resolved
from chainlint.find.chains import Visited, find_chains
from chainlint.find.runs import Memo
from chainlint.find.shapes import is_mask_value, module_names
from chainlint.find.screen import Seams, find_seams
from chainlint.engine.reparse import Reparser
from chainlint.engine.shift import shift, shift_chain
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
        return tuple(p for delta, planned, _ in self.parts for p in shift(planned, delta))

    @cached_property
    def findings(self) -> tuple[Finding, ...]:
        found = [f for delta, _, findings in self.parts for f in shift(findings, delta)]
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
    """A definition's results where it was, and what its walk read from outside its own text:
    the screen's seams over its lines (counted from its first line), the line above it when a
    chain starts on its first line (a directive there applies), what the module's names it
    mentions were assigned from before it, and, when the finder asked, what those names hold."""

    first: int
    planned: tuple[PlannedChain, ...]
    findings: tuple[Finding, ...]
    seams: tuple[tuple[int, int], ...] | None
    above: str | None = None
    identifiers: tuple[str, ...] = ()
    origins: tuple[FrameOrigin | None, ...] = ()
    resolved: tuple[tuple[str, Resolved], ...] | None = None


class _Asking(ModuleBindings):
    """The module's bindings, noting on the unit being walked that the finder asked what a
    name holds."""

    group: _Group | None = None

    def resolve(self, dotted: str, at: ast.AST | None, nested: bool = False, query: bool = False) -> Resolved:
        if self.group is not None:
            self.group.asked = True
        return super().resolve(dotted, at, nested, query)


def _resolved(bindings: ModuleBindings, identifiers: tuple[str, ...]) -> tuple[tuple[str, Resolved], ...]:
    """What each module-level name among `identifiers` holds (a free name in a filter may be
    one of them, or be defined in terms of them)."""
    module = bindings.scope(None).bindings.keys()
    return tuple((name, bindings.resolve(name, None)) for name in identifiers if name in module)


Key = tuple[str, int]


@dataclass
class _Group:
    """One top-level unit of this text: its lines and statements, its key, the results it may
    reuse, and as the finder passed it: what the module's names it mentions were assigned from,
    whether it read what a name holds, and whether it is `shared` (a statement of a run, a
    mask bound or read, a block: results that depend on more than the unit's own text)."""

    first: int
    last: int
    statements: list[ast.stmt]
    key: Key | None = None
    reused: _Unit | None = None
    identifiers: tuple[str, ...] = ()
    origins: tuple[FrameOrigin | None, ...] = ()
    asked: bool = False
    shared: bool = False


class DocumentAnalyser:
    """Analyses successive texts of one document; safe to call from several threads (one
    analysis at a time)."""

    def __init__(self, path: str, max_bytes: int = DEFAULT_MAX_BYTES, stores: LoadedStores | None = None) -> None:
        """`stores`: the profile stores, shared with the caller's other documents."""
        self.path = path
        self.max_bytes = max_bytes
        self._lock = threading.Lock()
        self._units: dict[Key, _Unit] = {}
        #: The plan and findings of each chain of the last analysis, moved to its first line.
        self._plans: dict[Chain, tuple[PlannedChain, tuple[Finding, ...]]] = {}
        self._parser = Reparser()
        self._memo = Memo()
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
            return self._failed(error.line, error.column, error.message, source)
        groups = [_Group(first, last, statements) for first, last, statements in _groups(tree)]
        self._parser.settle([s for s in tree.body if isinstance(s, _COMPOUND)])  # read for the imports
        store = (options.store or find_store(Path(self.path))).resolve()
        setting = (options, store, self._stores.load(store), module_names(tree), _imports(source, tree))
        if self._setting is None or any(a is not b and a != b for a, b in zip(setting, self._setting)):
            self._units, self._plans = {}, {}
            self._setting = setting
        asking = _Asking(tree)
        self._reusable(source, groups, seams, asking)
        try:
            chains = self._find(source, tree, seams, groups, asking)
        except SourceError as error:
            return self._failed(error.line, error.column, error.message, source)
        except RecursionError:
            return self._failed(1, 1, "nesting too deep to analyse", source)
        finally:
            asking.group = None
            self._memo.turn()
        planned, findings = self._planned(chains, options)
        fresh = [g.first for g in groups if g.reused is None]
        chains_of: dict[int, list[PlannedChain]] = {first: [] for first in fresh}
        findings_of: dict[int, list[Finding]] = {first: [] for first in fresh}
        for item in planned:
            chains_of[fresh[bisect.bisect_right(fresh, item.chain.span.line) - 1]].append(item)
        for finding in findings:
            findings_of[fresh[bisect.bisect_right(fresh, finding.span.line) - 1]].append(finding)
        parts = []
        kept: dict[Key, _Unit] = {}
        for group in groups:  # in the order of the text, as a whole analysis lists its chains
            unit = group.reused
            if unit is None:
                planned_here, found_here = chains_of[group.first], findings_of[group.first]
                if planned_here or found_here:
                    parts.append((0, tuple(planned_here), tuple(found_here)))
                unit = self._unit(source, group, seams, planned_here, found_here, asking)
            elif unit.planned or unit.findings:
                parts.append((group.first - unit.first, unit.planned, unit.findings))
            if unit is not None and group.key is not None:
                kept[group.key] = unit  # as analysed: each later analysis moves it from there
        self._units = kept
        return DocumentAnalysis(source, tuple(parts), statements=tuple((g.first, g.last) for g in groups))

    def _planned(self, chains: list[Chain], options: Options) -> tuple[list[PlannedChain], list[Finding]]:
        """Bind, plan and check the chains found; a chain found in the last analysis too (the
        same chain, perhaps moved by whole lines) keeps its plan and findings, which depend on
        nothing else under one setting."""
        keys = [shift_chain(chain, 1 - chain.span.line) for chain in chains]
        missing = [chain for chain, key in zip(chains, keys) if key not in self._plans]
        fresh = iter(plan_results([FileAnalysis(self.path, chains=tuple(missing))], options, self._stores)[0] if missing else ())
        planned: list[PlannedChain] = []
        findings: list[Finding] = []
        kept: dict[Chain, tuple[PlannedChain, tuple[Finding, ...]]] = {}
        for chain, key in zip(chains, keys):
            delta = chain.span.line - 1
            known = self._plans.get(key)
            if known is None:
                item = next(fresh)
                found = tuple(apply_rules([item], options)[0])
                known = (shift((item,), -delta)[0], shift(found, -delta))
            else:
                item, found = shift((known[0],), delta)[0], shift(known[1], delta)
            kept[key] = known
            planned.append(item)
            findings.extend(found)
        self._plans = kept
        return planned, findings

    def _failed(self, line: int, column: int, message: str, source: SourceText) -> DocumentAnalysis:
        return DocumentAnalysis(source, errors=(FileProblem(self.path, line, column, message),))

    def _reusable(self, source: SourceText, groups: list[_Group], seams: Seams, bindings: ModuleBindings) -> None:
        """Key every unit by its text (identical ones told apart by their rank), and find the
        results it may reuse: same text, same seams, the same line above where that counts,
        and the same values of the module's names it mentions (the rest is known only as the
        finder passes it: `_find`)."""
        seen: dict[str, int] = {}
        starts, text = source.line_starts, source.text
        for group in groups:
            end = starts[group.last] if group.last < len(starts) else len(text)
            content = text[starts[group.first - 1] : end]
            seen[content] = seen.get(content, -1) + 1
            group.key = (content, seen[content])
            unit = self._units.get(group.key)
            if unit is None:
                group.identifiers = tuple(sorted(set(_IDENTIFIER.findall(content))))
                continue
            group.identifiers = unit.identifiers
            above = source.lines[group.first - 2] if group.first > 1 else ""
            if (unit.seams == seams.relative(group.first, group.last) and unit.above in (None, above)
                    and (unit.resolved is None or _resolved(bindings, unit.identifiers) == unit.resolved)):
                group.reused = unit

    def _find(self, source: SourceText, tree: ast.Module, seams: Seams, groups: list[_Group], asking: _Asking) -> list[Chain]:
        """The chains of every unit not reused, walking nothing else. The rest of what a unit's
        chains depend on is known once the finder reaches it: what the module's names it
        mentions were assigned from, and for a unit of statements, whether one of them is in a
        statement run, binds a mask, or mentions a name bound to a mask before it (a unit that
        binds none reads only the masks bound before its first statement). A unit walked has
        its statements moved to their lines first, with the statements of every run and every
        mask bound at the top level, which its chains may read."""
        by_statement = {id(g.statements[0]): g for g in groups}
        masks = [s for s in tree.body if isinstance(s, ast.Assign) and is_mask_value(s.value)]
        self._parser.settle(masks)
        bound_masks = {id(s) for s in masks}
        runs_settled = False

        def visit(place: Visited) -> bool:
            nonlocal runs_settled
            if not runs_settled:
                self._parser.settle([s for s in tree.body if id(s) in place.in_runs])
                runs_settled = True
            group = by_statement.get(id(place.statement))
            if group is None:  # a later statement of the unit being walked, or of one reused
                return asking.group is not None and asking.group.reused is None
            asking.group = group
            group.origins = tuple(place.assigned.get(name) for name in group.identifiers)
            if not _definition(group.statements):
                group.shared = any(id(s) in place.in_runs or id(s) in bound_masks or isinstance(s, _COMPOUND) for s in group.statements) \
                    or any(name in place.masks for name in group.identifiers)
            if group.reused is not None and (group.shared or group.reused.origins != group.origins):
                group.reused = None
            if group.reused is None:
                self._parser.settle(group.statements)
            return group.reused is None

        return find_chains(source, tree, seams, asking, visit=visit, memo=self._memo)

    def _unit(self, source: SourceText, group: _Group, seams: Seams, planned: list[PlannedChain],
              findings: list[Finding], asking: _Asking) -> _Unit | None:
        """A unit's results as kept for the next analyses, or None when they may not be reused:
        a shared unit, a definition with a seam in its decorators, default values or bases
        (their chains read the module's masks). What a name holds may decide whether a chain is
        found at all (a mask written whole splits only when every conjunct may move), so it is
        kept for a unit without chains too."""
        if group.shared or group.key is None:
            return None
        statement = group.statements[0]
        if isinstance(statement, ast.ClassDef):
            header = [*statement.decorator_list, *statement.bases, *(k.value for k in statement.keywords)]
        elif isinstance(statement, (ast.FunctionDef, ast.AsyncFunctionDef)):
            arguments = statement.args
            header = [*statement.decorator_list, *arguments.defaults, *(d for d in arguments.kw_defaults if d is not None)]
        else:
            header = []
        if any(seams.meets(node.lineno, node.end_lineno or node.lineno) for node in header):
            return None
        relative = seams.relative(group.first, group.last)
        above = source.lines[group.first - 2] if group.first > 1 else ""
        on_first = any(p.chain.span.line == group.first for p in planned)
        resolved = _resolved(asking, group.identifiers) if group.asked else None
        return _Unit(group.first, tuple(planned), tuple(findings), relative, above if on_first else None,
                     group.identifiers, group.origins, resolved)


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


def _definition(statements: list[ast.stmt]) -> bool:
    """Whether a unit is one function or class definition: the units whose results are reused."""
    return len(statements) == 1 and isinstance(statements[0], (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef))


def _imports(source: SourceText, tree: ast.Module) -> tuple[str, ...]:
    """The module-level imports (within top-level blocks too): which module a name stands for."""
    found = []
    for statement in tree.body:
        nodes = ast.walk(statement) if isinstance(statement, _COMPOUND) else (statement,)
        found.extend(_text(source, node) for node in nodes if isinstance(node, (ast.Import, ast.ImportFrom)))
    return tuple(found)


def _text(source: SourceText, statement: ast.stmt) -> str:
    return source.segment((statement.lineno, statement.col_offset), (statement.end_lineno, statement.end_col_offset))  # type: ignore[arg-type]


def _same_target(before: ast.stmt, statement: ast.stmt) -> bool:
    def target(node: ast.stmt) -> str | None:
        if isinstance(node, ast.Assign) and len(node.targets) == 1 and isinstance(node.targets[0], ast.Name):
            return node.targets[0].id
        return None

    return target(before) is not None and target(before) == target(statement)


_IDENTIFIER = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_COMPOUND = (ast.If, ast.For, ast.AsyncFor, ast.While, ast.With, ast.AsyncWith, ast.Try, ast.TryStar, ast.Match)
