"""What a statement run may span: the statements between its filters that it may step over,
the in-place `dropna`, and masks bound to a name before the chain.

A run continues through a simple statement that neither reads nor writes any frame of the run
(a log line, an unrelated assignment): moving a filter across it changes nothing either sees.
One that binds a name a filter of the run reads stays between the filters around it (the
filter after it becomes a barrier). Anything else ends the run. Which statements of a run may
become one statement, when their filters join one mask, is told here too (`joined`).
"""

from __future__ import annotations

import ast
import bisect
import heapq
import re
from collections import Counter
from collections.abc import Sequence
from dataclasses import replace
from typing import Any

from chainlint.find.barriers import receiver_read_elsewhere
from chainlint.find.name_walk import ANY_NAME, NameCounts, count_names
from chainlint.find.positions import Positions
from chainlint.find.shapes import Shape
from chainlint.model import Step

#: Statements a run may step over (never control flow: a `return` between filters is a branch;
#: never `pass`, which separates a notebook's cells, since a run never spans two cells).
_SIMPLE = (ast.Expr, ast.Assign, ast.AnnAssign, ast.AugAssign, ast.Import, ast.ImportFrom)


def bound(statement: ast.stmt) -> set[str]:
    """Names a statement binds or may change: assignment targets, the owners of assigned items
    and attributes, and objects whose methods it calls with `inplace=` or that mutate."""
    names: set[str] = set()
    for node in ast.walk(statement):
        if isinstance(node, ast.Name) and isinstance(node.ctx, (ast.Store, ast.Del)):
            names.add(node.id)
        elif isinstance(node, (ast.Attribute, ast.Subscript)) and isinstance(node.ctx, (ast.Store, ast.Del)):
            root = node.value
            while isinstance(root, (ast.Attribute, ast.Subscript)):
                root = root.value
            if isinstance(root, ast.Name):
                names.add(root.id)
        elif isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute) and isinstance(node.func.value, ast.Name):
            names.add(node.func.value.id)
        elif isinstance(node, ast.NamedExpr):
            names.add(node.target.id)
    return names


class Memo:
    """What each statement mentions, binds and reads, each walked once. An editor keeps one
    across the analyses of a document's successive texts: its parser keeps the statement
    objects an edit did not touch, and an object never changes its text (only its lines). Holds
    the statements of the last walk only (`turn`), keeping each alive so its id stays its own."""

    def __init__(self) -> None:
        self._last: dict[int, list[Any]] = {}
        self._now: dict[int, list[Any]] = {}
        self._scopes: dict[int, tuple[ast.AST, Counter[str], Counter[str]]] = {}

    def _entry(self, statement: ast.stmt) -> list[Any]:
        entry = self._now.get(id(statement))
        if entry is None:
            entry = self._now[id(statement)] = self._last.get(id(statement)) or [statement, None, None]
        return entry

    def names(self, statement: ast.stmt) -> NameCounts:
        entry = self._entry(statement)
        if entry[1] is None:
            entry[1] = count_names(statement)
        return entry[1]  # type: ignore[no-any-return]

    def bound(self, statement: ast.stmt) -> set[str]:
        entry = self._entry(statement)
        if entry[2] is None:
            entry[2] = bound(statement)
        return entry[2]  # type: ignore[no-any-return]

    def scope(self, scope: ast.AST, module: ast.Module) -> tuple[Counter[str], Counter[str]]:
        """How many times a scope reads each name, and mentions it in any role (`NameCounts`), from
        one walk; the module's from its statements' names, each kept."""
        found = self._scopes.get(id(scope))
        if found is None:
            counts: tuple[Counter[str], Counter[str]] = (Counter(), Counter())
            for part in ([self.names(statement) for statement in module.body] if scope is module else [count_names(scope)]):
                part.count_reads(counts[0])
                part.count_mentions(counts[1])
            found = self._scopes[id(scope)] = (scope, *counts)
        return found[1], found[2]

    def turn(self) -> None:
        """Forget the statements the last walk did not ask about."""
        self._last, self._now, self._scopes = self._now, {}, {}


class Walked:
    """A block's statements as the scan for runs reads them, each walked once: from every
    filter statement the scan goes on over the simple statements that mention none of the
    run's frames, so where it stops is looked up (the next statement that is not simple, or
    that mentions one of the frames) instead of walked to, statement by statement."""

    def __init__(self, statements: list[ast.stmt], memo: Memo) -> None:
        self.statements = statements
        self._memo = memo
        self._walls: list[int] | None = None
        self._mentions: dict[str, list[int]] = {}

    def bound(self, statement: ast.stmt) -> set[str]:
        return self._memo.bound(statement)

    def scan(self, frame: str) -> Scan:
        """Where a run starting with `frame` stops, as the run takes more frames."""
        if self._walls is None:
            self._walls = []
            for number, statement in enumerate(self.statements):
                names = self._memo.names(statement).mentioned()
                if not isinstance(statement, _SIMPLE) or ANY_NAME in names:
                    self._walls.append(number)
                    continue
                for name in names:
                    self._mentions.setdefault(name, []).append(number)
        return Scan(len(self.statements), self._walls, self._mentions, frame)


class Scan:
    """The stops of one run's scan: its start only moves forward and its frames only grow, so
    each frame's next mention is kept in a heap and moved on only when the start passes it (a
    run renaming its frame at every statement has as many frames as statements; looking each
    up at every stop made the scan quadratic)."""

    def __init__(self, length: int, walls: list[int], mentions: dict[str, list[int]], frame: str) -> None:
        self._length = length
        self._walls = walls
        self._mentions = mentions
        self._start = 0
        self._next: list[tuple[int, int, str]] = []  # (statement, its place in the frame's mentions, frame)
        self._frames: set[str] = set()
        self.add(frame)

    def add(self, frame: str) -> None:
        if frame in self._frames:
            return
        self._frames.add(frame)
        numbers = self._mentions.get(frame, [])
        at = bisect.bisect_left(numbers, self._start)
        if at < len(numbers):
            heapq.heappush(self._next, (numbers[at], at, frame))

    def stop(self, start: int) -> int:
        """The index of the first statement from `start` on that the run may not step over (it
        is not simple, or it mentions one of the frames; a later filter of the run mentions its
        frame), or the block's length. Every statement before it is one the run may step over."""
        self._start = start
        while self._next and self._next[0][0] < start:
            _, at, frame = heapq.heappop(self._next)
            numbers = self._mentions[frame]
            at = bisect.bisect_left(numbers, start, at + 1)
            if at < len(numbers):
                heapq.heappush(self._next, (numbers[at], at, frame))
        wall = bisect.bisect_left(self._walls, start)
        found = self._walls[wall] if wall < len(self._walls) else self._length
        return min(found, self._next[0][0]) if self._next else found


class Fences:
    """The name fencing each member of a run (by its number): one that a statement stepped
    over before the member binds and a filter of the run reads, the earliest such statement's
    first by name. A bound name is looked up when a filter reads it, and dropped once it has
    fenced its members, not every statement stepped over compared with every later filter."""

    def __init__(self) -> None:
        self.found: dict[int, str] = {}
        self._binders: dict[str, list[tuple[int, int]]] = {}  # name -> (member, statement)

    def stepped(self, member: int, statement: int, names: set[str], read: set[str]) -> None:
        """A statement stepped over before `member`, binding `names`; `read` by the filters so far."""
        if names & read:
            self.found.setdefault(member, min(names & read))
        for name in names:
            self._binders.setdefault(name, []).append((member, statement))

    def filter_reads(self, value: set[str]) -> None:
        """A filter of the run reads `value`: it fences every member after a statement binding one."""
        hits: dict[int, tuple[int, str]] = {}
        for name in value:
            for member, statement in self._binders.pop(name, ()):
                if member not in self.found:
                    hits[member] = min(hits.get(member, (statement, name)), (statement, name))
        self.found.update((member, name) for member, (_, name) in hits.items())


def inplace_dropna(statement: ast.stmt) -> ast.Call | None:
    """The call of a statement `frame.dropna(..., inplace=True)`, on a plain name."""
    if not (isinstance(statement, ast.Expr) and isinstance(statement.value, ast.Call)):
        return None
    call = statement.value
    func = call.func
    if not (isinstance(func, ast.Attribute) and func.attr == "dropna" and isinstance(func.value, ast.Name)):
        return None
    flag = next((k.value for k in call.keywords if k.arg == "inplace"), None)
    if isinstance(flag, ast.Constant) and flag.value is True:
        return call
    return None


class Called:
    """The names read by code a scope defines that runs when called, not where it is written:
    the bodies of its functions and lambdas (methods too) and its generator expressions (resumed
    by `next`), at any depth, `ANY_NAME` where such code may read any name; walked once per
    scope, and only for a run that would step over a statement that is not `inert`. A statement
    calling such code reads them (at module level, any function of the module reads the
    module's names)."""

    def __init__(self) -> None:
        self._names: dict[int, set[str]] = {}

    def reads(self, scope: ast.AST, frames: set[str]) -> bool:
        """Whether such code of `scope` may read one of `frames`."""
        if id(scope) not in self._names:
            found: set[str] = set()
            for node in ast.walk(scope):
                if node is not scope and isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.Lambda)):
                    for part in node.body if isinstance(node.body, list) else [node.body]:
                        found |= count_names(part).mentioned()
                elif isinstance(node, ast.GeneratorExp):
                    found |= count_names(node).mentioned()
            self._names[id(scope)] = found
        names = self._names[id(scope)]
        return ANY_NAME in names or not frames.isdisjoint(names)


def inert(statement: ast.stmt) -> bool:
    """Whether a statement runs no code of the module's when it executes: names bound to
    literals, names, or tuples and lists of them (anything else may call a function, or a
    method of an object the module defines, through an operator or attribute)."""
    if isinstance(statement, ast.Expr):
        return isinstance(statement.value, ast.Constant)
    if not isinstance(statement, ast.Assign) or not all(isinstance(t, ast.Name) for t in statement.targets):
        return False
    return all(isinstance(n, (ast.Constant, ast.Name, ast.Tuple, ast.List, ast.Load)) for n in ast.walk(statement.value))


def read_elsewhere(counts: Counter[str], inside: Counter[str], name: str) -> str | None:
    """Why the statement binding `name`, the frame a run's step receives, must stay: its scope
    (`counts`, `Memo.scope`) reads it besides the run's own statements (`inside`), or may read
    any name at run time; else None."""
    if counts[ANY_NAME]:
        return receiver_read_elsewhere(name, at_run_time=True)
    if counts[name] > inside[name]:
        return receiver_read_elsewhere(name, at_run_time=False)
    return None


#: A member of a run: its statement, the name it assigns, its filter steps.
Member = tuple[ast.stmt, str, Sequence[Shape]]


def joined(members: Sequence[Member], steps: list[Step], scope: ast.AST, positions: Positions,
           memo: Memo, counted: Counter[str], stepped: Sequence[frozenset[str]] = ()) -> list[Step]:
    """The run's steps with `alone` and `merges` set (see `Step`): which statements may become
    one statement when the planner joins their filters into one mask. A name the earlier of two
    statements assigns stops being bound then, so it must be used nowhere else in the scope
    (`counted`: how many times the scope mentions each name, `Memo.scope`); in a class body it
    is an attribute, never dropped. A group is written where its first statement was, under the
    name its last one assigns, so no statement stepped over before a member (`stepped`: the
    names they mention, per member) may mention the name of that member or a later one."""
    alone = [_alone(statement, shapes, positions) for statement, _, shapes in members]
    if not any(alone):
        return steps
    later_names: list[set[str]] = [set() for _ in members]
    for number in range(len(members) - 1, -1, -1):
        later_names[number] = {members[number][1]} | (later_names[number + 1] if number + 1 < len(members) else set())
    inside: Counter[str] = Counter()
    for statement, _, _ in members:
        memo.names(statement).count_mentions(inside)
    named = isinstance(scope, (ast.Module, ast.FunctionDef, ast.AsyncFunctionDef))
    out = []
    for step in steps:
        number = step.statement
        merges = number > 0 and alone[number] and alone[number - 1]
        if merges and number < len(stepped) and stepped[number] & later_names[number]:
            merges = False
        name = members[number - 1][1] if number > 0 else ""
        if merges and name != members[number][1]:
            merges = named and counted[name] == inside[name] and not counted[ANY_NAME]
        out.append(replace(step, alone=alone[number], merges=merges))
    return out


def _alone(statement: ast.stmt, shapes: Sequence[Shape], positions: Positions) -> bool:
    """Whether a member is `name = frame<one step>` standing alone on its lines: nothing before
    it on its first line, nothing but a comment after it, the `=` and the step's start on its
    first line, no parentheses around the value, no walrus."""
    if not (isinstance(statement, ast.Assign) and len(shapes) == 1 and statement.value is shapes[0].node):
        return False
    value, target = statement.value, statement.targets[0]
    if any(isinstance(node, ast.NamedExpr) for node in ast.walk(statement)):
        return False
    if (statement.end_lineno, statement.end_col_offset) != (value.end_lineno, value.end_col_offset):
        return False  # `x = (x[...])`
    source = positions.source
    if source.lines[statement.lineno - 1][: source.column(statement.lineno, statement.col_offset) - 1].strip():
        return False
    if positions.step_span(shapes[0].inner, value).line != statement.lineno:
        return False
    between = source.segment((target.end_lineno, target.end_col_offset), (value.lineno, value.col_offset))  # type: ignore[arg-type]
    if not re.fullmatch(r"[ \t]*=[ \t]*", between):
        return False
    end_line = statement.end_lineno or statement.lineno
    rest = source.lines[end_line - 1][source.column(end_line, statement.end_col_offset or 0) - 1 :]
    return re.fullmatch(r"[ \t]*(#[^\r\n]*)?[\r\n]*", rest) is not None
