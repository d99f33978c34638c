"""Find every chain of row filters in a parsed module.

Two forms: a method chain (`df[a].query(b)`, found at its outermost step) and a statement run
(`x = df[a]` then `x = x[b]`, consecutive statements of one block). Only statements whose lines
meet a seam of the textual screen are walked; the screen proves the others hold no chain.
"""

from __future__ import annotations

import ast
from collections import Counter
from collections.abc import Callable, Mapping
from dataclasses import dataclass, replace

from chainlint.model import Barrier, BarrierKind, Chain, ChainForm, FrameOrigin, Span, Step, StepKind
from chainlint.find.barriers import assigned_between
from chainlint.find.bindings import ModuleBindings, Resolved, dotted_name
from chainlint.find.fused import conjunct_shapes
from chainlint.find.joining import with_apart
from chainlint.find.origins import Origins, keep_comment, near, profile_comment
from chainlint.find.positions import Positions
from chainlint.find.runs import Called, Fences, Memo, Walked, count_names, inert, inplace_dropna, joined, read_elsewhere
from chainlint.find.scopes import nested_children
from chainlint.find.screen import Seams
from chainlint.find.shapes import Masks, Names, Shape, is_mask_value, mask_frames, module_names, peel, rows_axis
from chainlint.find.steps import StepContext, build_step, selected_columns
from chainlint.parse.source import SourceText


@dataclass(frozen=True)
class Visited:
    """A top-level statement as the finder reaches it, before it walks it: what the module's
    names were assigned from so far (read it then: it changes as the walk goes on), the masks
    bound to names before it, and the ids of the module's statements that belong to a
    statement run (what a caller reusing a statement's chains found before must compare)."""

    statement: ast.stmt
    assigned: Mapping[str, FrameOrigin]
    masks: Masks
    in_runs: frozenset[int]


#: Called with each top-level statement; False: the caller knows its chains (no walk, no run).
Visit = Callable[[Visited], bool]


def find_chains(source: SourceText, tree: ast.Module, seams: Seams, bindings: ModuleBindings | None = None,
                least: int = 2, visit: Visit | None = None, memo: Memo | None = None) -> list[Chain]:
    """All chains of the module, in source order (`bindings`: the module's, when the caller
    wants to see what the finder asks of them); `least`: the fewest steps of a method chain
    (1 for the rewriter, to find a chain fused into one mask again); `visit`: for a caller that
    reuses chains found before (what a statement would have seen); `memo`: what statements
    mention, bind and read, kept by a caller that walks successive trees sharing statements."""
    finder = _Finder(source, seams, module_names(tree), bindings or ModuleBindings(tree))
    finder.least = least
    finder.visit, finder.top = visit, tree.body
    finder.memo = memo or Memo()
    finder.block(tree.body)
    return sorted(finder.chains, key=lambda c: (c.span.line, c.span.column))


@dataclass(frozen=True)
class _Decomposed:
    base: ast.expr
    shapes: tuple[Shape, ...]


@dataclass(frozen=True)
class _Member:
    """One statement of a run: the name it leaves the frame in, and its filter steps."""

    statement: ast.stmt
    target: str
    decomposed: _Decomposed
    #: A name bound between this statement and the one before that some filter reads.
    fence: str | None = None
    #: The names the statements stepped over between this statement and the one before mention.
    stepped: frozenset[str] = frozenset()


class _Finder:
    def __init__(self, source: SourceText, seams: Seams, names: Names, bindings: ModuleBindings) -> None:
        self.source = source
        self.bindings = bindings
        #: The scope (function, lambda or class node; None for the module) of the code walked.
        self.scope: ast.AST | None = None
        self.nested = False  # in a comprehension of that scope (which does not see a class's names)
        #: Columns the last `.loc[mask, cols]` of the chain being built kept (None: all, or unknown).
        self.selected: tuple[str, ...] | None = None
        #: Masks bound to names before the statement being walked, and per statement of the block.
        self.masks: Masks = {}
        self.block_masks: list[Masks] = []
        self.seams = seams
        self.names = names
        self.chains: list[Chain] = []
        self.least = 2
        self.absorbed: set[int] = set()
        self.called = Called()
        self.origins = Origins(names.pandas, source.lines, bindings, lambda: self.scope)
        self.positions = Positions(source)
        self.visit: Visit | None = None
        self.top: list[ast.stmt] = []
        self.memo = Memo()

    # -- walking --------------------------------------------------------------------------
    def block(self, statements: list[ast.stmt]) -> None:
        """Walk a block in order, so that a chain sees the assignments made before it."""
        saved = self.masks, self.block_masks
        self.block_masks = self.mask_table(statements)
        runs = self.runs(statements)
        visit = self.visit if statements is self.top else None
        in_runs = frozenset(id(m.statement) for run in runs.values() for m in run) if visit is not None else frozenset()
        for index, statement in enumerate(statements):
            self.masks = self.block_masks[index]
            if visit is not None and not visit(Visited(statement, self.origins.scopes[0][1], self.masks, in_runs)):
                self.origins.record(statement)
                continue
            if index in runs:
                self.chains.append(self.statement_run(runs[index]))
            if isinstance(statement, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
                self.scoped(statement)
            elif self.seams.meets(statement.lineno, statement.end_lineno or statement.lineno):
                self.node(statement)
            self.origins.record(statement)
        self.masks, self.block_masks = saved

    def mask_table(self, statements: list[ast.stmt]) -> list[Masks]:
        """Per statement of a block, the masks bound to a name before it (`m = df.a > 1`, bound
        once in the scope, its frame not rebound or changed since)."""
        inherited = self.masks  # a nested block (a loop's body) sees the masks bound before it
        if not any(isinstance(s, ast.Assign) and is_mask_value(s.value) for s in statements):
            return [inherited] * len(statements)
        table: list[Masks] = []
        current = inherited
        scope = None
        for statement in statements:
            table.append(current)
            changed = self.memo.bound(statement)
            if current and changed:
                current = {k: v for k, v in current.items() if k not in changed and v[1].split(".")[0] not in changed}
            if isinstance(statement, ast.Assign) and len(statement.targets) == 1 and isinstance(statement.targets[0], ast.Name):
                name, value = statement.targets[0].id, statement.value
                frames = mask_frames(value, self.names) if is_mask_value(value) else set()
                if len(frames) == 1:
                    scope = scope or self.bindings.scope(self.scope)  # built only when a mask is bound
                    if len(scope.bindings.get(name, [])) == 1 and name not in scope.parameters:
                        current = {**current, name: (value, next(iter(frames)))}
        return table

    def scoped(self, definition: ast.FunctionDef | ast.AsyncFunctionDef | ast.ClassDef) -> None:
        first = min([definition.lineno] + [d.lineno for d in definition.decorator_list])
        if not self.seams.meets(first, definition.end_lineno or definition.lineno):
            return
        for decorator in definition.decorator_list:
            self.expression(decorator)
        if isinstance(definition, ast.ClassDef):
            for base in [*definition.bases, *(k.value for k in definition.keywords)]:
                self.expression(base)
        else:
            for default in definition.args.defaults + [d for d in definition.args.kw_defaults if d is not None]:
                self.expression(default)
        self.origins.enter(definition if not isinstance(definition, ast.ClassDef) else None)
        (outer, nested), self.scope, self.nested = (self.scope, self.nested), definition, False
        masks, self.masks = self.masks, {}
        self.block(definition.body)
        self.scope, self.nested, self.masks = outer, nested, masks
        self.origins.leave()

    def node(self, node: ast.AST) -> None:
        for _, value in ast.iter_fields(node):
            if isinstance(value, list):
                if value and isinstance(value[0], ast.stmt):
                    self.block(value)
                    continue
                for item in value:
                    if isinstance(item, ast.expr):
                        self.expression(item)
                    elif isinstance(item, ast.AST):
                        self.node(item)
            elif isinstance(value, ast.expr):
                self.expression(value)
            elif isinstance(value, ast.AST):
                self.node(value)

    def expression(self, root: ast.expr) -> None:
        """Find the method chains of an expression; a chain in a lambda or comprehension reads its scope."""
        outer, nested = self.scope, self.nested
        stack: list[tuple[ast.AST, ast.AST | None, bool]] = [(root, outer, nested)]
        while stack:
            node, self.scope, self.nested = stack.pop()
            if isinstance(node, ast.expr) and not self.seams.meets(node.lineno, node.end_lineno or node.lineno):
                continue
            inner, nested_in = (node, False) if isinstance(node, ast.Lambda) else (self.scope, self.nested)
            if (decomposed := self.decompose(node)) is None:
                stack.extend((child, inner, nested_in or apart) for child, apart in nested_children(node))
                continue
            if id(node) not in self.absorbed and len(decomposed.shapes) >= 2:
                self.chains.append(self.method_chain(node, decomposed))
            elif id(node) not in self.absorbed and (fused := self.fused_mask(node, decomposed)) is not None:
                self.chains.append(fused)
            elif id(node) not in self.absorbed and len(decomposed.shapes) >= self.least:
                self.chains.append(self.method_chain(node, decomposed))
            stack.append((decomposed.base, self.scope, self.nested))
            for shape in decomposed.shapes:
                lambda_scope = shape.arg if isinstance(shape.arg, ast.Lambda) else self.scope
                stack.extend((a, lambda_scope if a is shape.arg else self.scope, self.nested and a is not shape.arg) for a in _arguments(shape.node))
        self.scope, self.nested = outer, nested

    def decompose(self, node: ast.AST) -> _Decomposed | None:
        shapes = []
        current = node
        while (shape := peel(current, self.names, self.masks)) is not None:
            shapes.append(shape)
            current = shape.inner
        if not shapes:
            return None
        return _Decomposed(current, tuple(reversed(shapes)))

    # -- building chains ------------------------------------------------------------------
    def method_chain(self, node: ast.expr, decomposed: _Decomposed) -> Chain:
        frame = self.positions.text_of(decomposed.base)
        root = dotted_name(decomposed.base)
        outer = frozenset([root]) if root else frozenset()
        steps = with_apart(self.steps(decomposed, root, outer, statement=0), decomposed.shapes, self.positions, self.class_body())
        span = self.positions.node_span(node)
        return Chain(self.source.path, span, frame, ChainForm.METHOD, steps, self.origins.lookup(root, decomposed.base), near(self.source.lines, span.line, profile_comment), near(self.source.lines, span.line, keep_comment))

    def class_body(self) -> bool:
        """Whether the code walked runs in a class body's own scope."""
        return isinstance(self.scope, ast.ClassDef) and not self.nested

    def resolver(self, nested: bool = False, query: bool = False) -> Callable[[str], Resolved]:
        """Names as the code (`nested`: a lambda or comprehension; a query's text) reads them."""
        bindings, scope = self.bindings, self.scope
        return lambda name: bindings.resolve(name, scope, nested, query)

    def steps(
        self, decomposed: _Decomposed, own: str | None, outer: frozenset[str], statement: int,
        assigned: frozenset[str] = frozenset(),
    ) -> tuple[Step, ...]:
        built = []
        if statement == 0:
            self.selected = None
        for index, shape in enumerate(decomposed.shapes):
            built.append(build_step(shape, self.context(shape, own if index == 0 else None, outer, statement, assigned)))
            if shape.selection is not None:
                self.selected = selected_columns(shape)
        return tuple(built)

    def context(self, shape: Shape, own: str | None, outer: frozenset[str], statement: int, assigned: frozenset[str]) -> StepContext:
        return StepContext(
            own=own,
            outer=outer,
            names=self.names,
            text_of=self.positions.text_of,
            span_of=self.positions.node_span,
            span=self.positions.step_span(shape.inner, shape.node),
            statement=statement,
            resolve=self.resolver(nested=self.nested or isinstance(shape.arg, ast.Lambda), query=shape.kind is StepKind.QUERY),
            assigned=assigned,
            selected=self.selected,
        )

    def fused_mask(self, node: ast.expr, decomposed: _Decomposed) -> Chain | None:
        """A lone step whose mask is a written conjunction, as a chain of its conjuncts, when
        every conjunct is a step that may move (`fused.py`)."""
        parts = conjunct_shapes(decomposed.shapes[0], self.positions)
        if parts is None or (decomposed.shapes[0].kind.is_mask and not all(mask_frames(p.arg, self.names) for p, _ in parts)):
            return None
        root = dotted_name(decomposed.base)
        outer = frozenset([root]) if root else frozenset()
        self.selected = None
        steps = [replace(build_step(part, self.context(part, root, outer, 0, frozenset())), conjunct=span) for part, span in parts]
        if not all(step.movable for step in steps):
            return None
        span = self.positions.node_span(node)
        lines = self.source.lines
        return Chain(
            self.source.path, span, self.positions.text_of(decomposed.base), ChainForm.MASK, tuple(steps),
            self.origins.lookup(root, decomposed.base), near(lines, span.line, profile_comment), near(lines, span.line, keep_comment),
        )

    def runs(self, statements: list[ast.stmt]) -> dict[int, list[_Member]]:
        """Statement runs of a block, by the index of their first statement: each statement
        filters the frame the one before produced (under the same name or a new one), with
        statements that touch neither the run's frames nor the names its filters read between."""
        found: dict[int, list[_Member]] = {}
        walked = Walked(statements, self.memo)
        shaped: dict[int, tuple[str, _Decomposed] | None] = {}

        def filtering(number: int) -> tuple[str, _Decomposed] | None:
            if number not in shaped:
                self.masks = self.block_masks[number]
                shaped[number] = self.assignment(statements[number]) or self.inplace(statements[number])
            return shaped[number]

        index = 0
        while index < len(statements):
            first = filtering(index)
            if first is None:
                index += 1
                continue
            members = [_Member(statements[index], first[0], first[1])]
            scan = walked.scan(first[0])
            read: set[str] | None = None  # the names the run's filters read, once it has a second
            fences = Fences()
            following = last = index + 1
            while (stop := scan.stop(following)) < len(statements):
                later = filtering(stop)
                if later is None or dotted_name(later[1].base) != members[-1].target:
                    break  # a statement the run may not step over
                frames = {later[0], *(m.target for m in members)}
                if not all(inert(statements[n]) for n in range(following, stop)) and self.called.reads(self.scope or self.bindings.tree, frames):
                    break  # a statement that may call code reading the run's frames
                if read is None:
                    read = count_names(first[1].shapes[-1].node).mentioned()
                between: set[str] = set()
                for number in range(following, stop):  # stepped over
                    fences.stepped(len(members), number, walked.bound(statements[number]), read)
                    between |= self.memo.names(statements[number]).mentioned()
                value = count_names(later[1].shapes[-1].node).mentioned()
                fences.filter_reads(value)
                members.append(_Member(statements[stop], later[0], later[1], stepped=frozenset(between)))
                scan.add(later[0])
                read |= value
                following = last = stop + 1
            if len(members) >= 2:
                members = [replace(m, fence=fences.found.get(n)) for n, m in enumerate(members)]
            if len(members) >= 2 and self.seams.meets(members[0].statement.lineno, members[-1].statement.end_lineno or 0):
                found[index] = members
                for member in members:
                    self.absorbed.add(id(member.decomposed.shapes[-1].node))
            index = last if len(members) >= 2 else index + 1
        return found

    def inplace(self, statement: ast.stmt) -> tuple[str, _Decomposed] | None:
        """`(x, steps)` for a statement `x.dropna(..., inplace=True)`."""
        call = inplace_dropna(statement)
        if call is None or call.args or any(k.arg is None for k in call.keywords) or not rows_axis(call):
            return None
        assert isinstance(call.func, ast.Attribute) and isinstance(call.func.value, ast.Name)
        shape = Shape(StepKind.DROPNA, call, call.func.value, None, inplace=True)
        return call.func.value.id, _Decomposed(call.func.value, (shape,))

    def statement_run(self, members: list[_Member]) -> Chain:
        first_base = members[0].decomposed.base
        root = dotted_name(first_base)
        steps: list[Step] = []
        assigned = frozenset(member.target for member in members)
        scope = self.scope if self.scope is not None else self.bindings.tree
        scope_reads, scope_mentions = self.memo.scope(scope, self.bindings.tree)
        inside: Counter[str] = Counter()
        for member in members:
            self.memo.names(member.statement).count_reads(inside)
        for number, member in enumerate(members):
            own = dotted_name(member.decomposed.base)
            outer = frozenset(name for name in (root, own) if name)
            built = list(self.steps(member.decomposed, own, outer, statement=number, assigned=assigned))
            before = members[number - 1].target if number else None
            elsewhere = read_elsewhere(scope_reads, inside, before) if before not in (None, member.target) else None
            if elsewhere:
                built[0] = replace(built[0], barrier=Barrier(BarrierKind.FRAME, elsewhere))
            elif member.fence is not None:
                built[0] = replace(built[0], barrier=Barrier(BarrierKind.FRAME, assigned_between(member.fence)))
            steps.extend(built)
        steps = joined([(m.statement, m.target, m.decomposed.shapes) for m in members], steps, scope, self.positions, self.memo,
                       scope_mentions, [m.stepped for m in members])
        shapes = [shape for member in members for shape in member.decomposed.shapes]
        steps = list(with_apart(steps, shapes, self.positions, self.class_body(), run=True))
        start = self.positions.node_span(members[0].statement)
        end = self.positions.node_span(members[-1].statement)
        span = Span(start.line, start.column, end.end_line, end.end_column)
        origin = self.origins.lookup(root, first_base)
        return Chain(
            self.source.path, span, self.positions.text_of(first_base), ChainForm.STATEMENTS, tuple(steps), origin,
            near(self.source.lines, span.line, profile_comment), near(self.source.lines, span.line, keep_comment),
        )

    def assignment(self, statement: ast.stmt) -> tuple[str, _Decomposed] | None:
        """`(x, steps)` for a statement `x = <expression ending in filter steps>`."""
        if not isinstance(statement, ast.Assign) or len(statement.targets) != 1:
            return None
        target = statement.targets[0]
        if not isinstance(target, ast.Name):
            return None
        decomposed = self.decompose(statement.value)
        return None if decomposed is None else (target.id, decomposed)


def _arguments(node: ast.expr) -> list[ast.AST]:
    """The parts of a step that may hold chains of their own (masks, lambdas, call arguments)."""
    if isinstance(node, ast.Subscript):
        return [node.slice]
    if isinstance(node, ast.Call):
        return list(node.args) + [k.value for k in node.keywords]
    return []
