"""Prove an edited file is the original with exactly the chains' steps put into their planned groups.

In the spirit of a formatter's AST-equivalence check: the new file must parse with `ast`, and
every rewritten top-level statement with libcst (the rest is text the edit did not touch);
a rewritten statement must keep every token outside the chain's steps and every comment (a
comment that swallowed code, or moved before it, changes both), and its `ast` outside the
chains; top-level statements that hold no chain must keep their exact text, and the comments
between statements must stay the same; the finder, run again, must see each chain with the
same predicates in the planned order, each group of steps one mask (its predicates joined with
`and`), its barriers where they were and its `# chainlint:`
comments still applying. A statement run whose steps join is compared with the original less
the statements the grouping removes, each statement kept under the name its group's last
statement assigned.
"""

from __future__ import annotations

import ast
import bisect
import tokenize
from collections import Counter, defaultdict
from collections.abc import Sequence

import libcst

from chainlint.find.chains import find_chains
from chainlint.find.screen import Seams, find_seams
from chainlint.ir import And, Node, make_and
from chainlint.model import Chain, ChainForm, Step
from chainlint.parse.source import SourceError, SourceText, parse_tree, text_source
from chainlint.rewrite.permute import RewriteError

_PLACEHOLDER = "__chainlint_chain__"
Groups = Sequence[Sequence[int]]


class _Blank(ast.NodeTransformer):
    """Replace each chain with a placeholder name, so that the rest can be compared; in the
    original, drop the statements a grouped run removes and give each statement it keeps the
    name it assigns in the rewrite (`joins`)."""

    def __init__(self, source: SourceText, chains: Sequence[Chain], joins: _Joins | None = None) -> None:
        self.spans: set[tuple[int, int, int, int]] = set()
        lines: list[tuple[int, int]] = []
        for chain in chains:
            if chain.form is ChainForm.STATEMENTS:
                lines.extend((step.span.line, step.span.line) for step in chain.steps)
            else:
                span = chain.span
                self.spans.add((span.line, _byte_column(source, span.line, span.column),
                                span.end_line, _byte_column(source, span.end_line, span.end_column)))
        self.runs = _Lines(lines)  # the lines where a run's steps start
        self.joins = joins or _Joins()

    def visit(self, node: ast.AST) -> ast.AST | None:
        if id(node) in self.joins.removed:
            return None
        if isinstance(node, (ast.Subscript, ast.Call)) and (node.lineno, node.col_offset, node.end_lineno, node.end_col_offset) in self.spans:
            return ast.Name(id=_PLACEHOLDER, ctx=ast.Load())
        if isinstance(node, ast.Assign) and self.runs.meeting(node.lineno, node.end_lineno or node.lineno):
            node.value = ast.Name(id=_PLACEHOLDER, ctx=ast.Load())
            name = self.joins.renamed.get(id(node))
            if name is not None:
                node.targets = [ast.Name(id=name, ctx=ast.Store())]
            return node
        return self.generic_visit(node)


class _Joins:
    """What grouping statement runs does to the original's statements: the statements removed
    (by `id` of their `ast` node, and their lines) and the statements kept under the name the
    last statement of their group assigned (by `id`, and by line for the tokens)."""

    def __init__(self) -> None:
        self.removed: set[int] = set()
        self.renamed: dict[int, str] = {}
        self.lines: list[tuple[int, int]] = []
        self.names: dict[int, str] = {}

    @classmethod
    def of(cls, tree: ast.Module, source: SourceText, rewritten: Sequence[tuple[Chain, Groups]]) -> _Joins:
        joins = cls()
        runs = [(chain, groups) for chain, groups in rewritten
                if chain.form is ChainForm.STATEMENTS and any(len(group) > 1 for group in groups)]
        if not runs:
            return joins
        assigns: dict[int, list[ast.Assign]] = defaultdict(list)
        for node in ast.walk(tree):
            if isinstance(node, ast.Assign):
                assigns[node.lineno].append(node)

        def statement(step: Step) -> ast.Assign:
            column = _byte_column(source, step.span.line, step.span.column)
            found = [a for a in assigns.get(step.span.line, []) if a.value.col_offset <= column < (a.value.end_col_offset or 0)
                     or (a.value.end_lineno or 0) > step.span.line and a.value.col_offset <= column]
            if len(found) != 1 or len(found[0].targets) != 1 or not isinstance(found[0].targets[0], ast.Name):
                raise RewriteError(f"the statement of the step at line {step.span.line} is not one assignment to a name")
            return found[0]

        for chain, groups in runs:
            position = 0
            for group in groups:
                if len(group) > 1:
                    kept, last = statement(chain.steps[position]), statement(chain.steps[position + len(group) - 1])
                    name = last.targets[0].id  # type: ignore[attr-defined]
                    joins.renamed[id(kept)] = joins.names[kept.lineno] = name
                    for k in range(position + 1, position + len(group)):
                        gone = statement(chain.steps[k])
                        joins.removed.add(id(gone))
                        joins.lines.append((gone.lineno, gone.end_lineno or gone.lineno))
                position += len(group)
        return joins


def _byte_column(source: SourceText, line: int, column: int) -> int:
    return len(source.lines[line - 1][: column - 1].encode("utf-8"))


class _Lines:
    """Line ranges (first, last), sorted once, so that a question about one line or one range
    costs a bisection, not a pass over every range: verification stays linear in the file."""

    def __init__(self, ranges: Sequence[tuple[int, int]]) -> None:
        self.order = sorted(range(len(ranges)), key=lambda index: ranges[index])
        self.ranges = [ranges[index] for index in self.order]
        self.firsts = [first for first, _ in self.ranges]
        self.reach: list[int] = []  # the furthest last line of the ranges up to each one
        for _, last in self.ranges:
            self.reach.append(max(last, self.reach[-1]) if self.reach else last)

    def holds(self, line: int) -> bool:
        """Whether a range holds `line`."""
        index = bisect.bisect_right(self.firsts, line)
        return index > 0 and self.reach[index - 1] >= line

    def meeting(self, first: int, last: int) -> list[int]:
        """The indices (in the order given) of the ranges that share a line with first..last."""
        index = bisect.bisect_right(self.firsts, last)
        found = []
        while index > 0 and self.reach[index - 1] >= first:
            index -= 1
            if self.ranges[index][1] >= first:
                found.append(self.order[index])
        return found


class _Found:
    """The chains the finder sees in the new text, indexed by form and steps (predicate and
    whether it may move), each list in the finder's order (by position)."""

    def __init__(self, found: Sequence[Chain]) -> None:
        self.by_steps: dict[tuple[ChainForm, tuple[tuple[Node, bool], ...]], list[tuple[int, Chain]]] = defaultdict(list)
        for index, chain in enumerate(found):
            self.by_steps[(chain.form, tuple((s.predicate, s.movable) for s in chain.steps))].append((index, chain))
        self.lines = {key: [chain.span.line for _, chain in chains] for key, chains in self.by_steps.items()}
        self.used: set[int] = set()

    def nearest(self, key: tuple[ChainForm, tuple[tuple[Node, bool], ...]], line: int, column: int) -> tuple[tuple[int, int, int], Chain] | None:
        """The unused chain under `key` nearest to line:column, by (lines apart, columns
        apart, then the finder's order), with that rank; None when there is none."""
        chains, lines = self.by_steps.get(key, []), self.lines.get(key, [])
        below, above = bisect.bisect_left(lines, line) - 1, bisect.bisect_left(lines, line)
        while below >= 0 or above < len(chains):
            apart = min(([line - lines[below]] if below >= 0 else []) + ([lines[above] - line] if above < len(chains) else []))
            best: tuple[tuple[int, int, int], Chain] | None = None
            while below >= 0 and line - lines[below] == apart:
                best = _better(best, apart, column, *chains[below], self.used)
                below -= 1
            while above < len(chains) and lines[above] - line == apart:
                best = _better(best, apart, column, *chains[above], self.used)
                above += 1
            if best is not None:
                return best
        return None


def _better(best: tuple[tuple[int, int, int], Chain] | None, apart: int, column: int, index: int, chain: Chain,
            used: set[int]) -> tuple[tuple[int, int, int], Chain] | None:
    rank = (apart, abs(chain.span.column - column), index)
    return best if index in used or (best is not None and best[0] <= rank) else (rank, chain)


def _found_again(found: _Found, chain: Chain, groups: Groups) -> Chain:
    """The chain of the new text that is `chain` in the planned plan: same form, and a step
    for each group (its steps' predicates joined with `and`, movable unless it is a step that
    was not), or each step in the planned order, nearest to where it was (an edit moves no
    line outside the chain's own text)."""
    fused = tuple((make_and(chain.steps[i].predicate for i in group), all(chain.steps[i].movable for i in group)) for group in groups)
    flat = tuple((chain.steps[i].predicate, chain.steps[i].movable) for group in groups for i in group)
    # One group is one mask: a chain of its conjuncts where the finder reads written masks so.
    # A mask written whole and split is a method chain of its groups.
    # A run grouped into one statement is that statement's mask, or a one-step method chain.
    if chain.form is ChainForm.MASK:
        forms = {ChainForm.MASK, ChainForm.METHOD} if len(groups) == 1 else {ChainForm.METHOD}
    elif chain.form is ChainForm.STATEMENTS:
        forms = {chain.form, ChainForm.MASK, ChainForm.METHOD} if len(groups) == 1 else {chain.form}
    else:
        forms = {chain.form, ChainForm.MASK} if len(groups) == 1 else {chain.form}
    shapes = {fused, flat}
    if len(groups) == 1 and isinstance(fused[0][0], And):
        # A step itself a conjunction (`.query("a and b")`) joined to others: one written mask
        # of all the conjuncts.
        shapes.add(tuple((part, fused[0][1]) for part in fused[0][0].parts))
    candidates = [near for form in forms for steps in shapes
                  if (near := found.nearest((form, steps), chain.span.line, chain.span.column)) is not None]
    if not candidates:
        raise RewriteError(f"after rewriting, the chain at line {chain.span.line} is not found again with its steps in the planned order")
    (_, _, index), again = min(candidates, key=lambda near: near[0])
    if (again.profile_comment, again.keep) != (chain.profile_comment, chain.keep):
        raise RewriteError(f"after rewriting, the chain at line {chain.span.line} would lose its `# chainlint:` comment")
    found.used.add(index)
    return again


def verify(old: SourceText, new_text: str, rewritten: Sequence[tuple[Chain, Groups | Sequence[int]]]) -> None:
    """Raise RewriteError unless `new_text` is `old` with the chains in their planned groups
    (each group of steps one mask, the groups in the planned order; a plain order of step
    indices is a plan of single steps)."""
    rewritten = [(chain, [(g,) if isinstance(g, int) else g for g in plan]) for chain, plan in rewritten]
    new = text_source(old.path, new_text, old.encoding)
    try:
        new_tree = parse_tree(new)
    except SourceError as error:
        raise RewriteError(f"the rewritten file does not parse: {error.message}") from None
    old_chains = [chain for chain, _ in rewritten]
    # A chain fused into one mask is one step: found only when single steps are looked for.
    single = any(len(groups) == 1 for _, groups in rewritten)
    found = find_chains(new, new_tree, Seams(None) if single else find_seams(new_text), least=1 if single else 2)
    index = _Found(found)
    new_chains = [_found_again(index, chain, order) for chain, order in rewritten]
    old_tree = parse_tree(old)
    # Statements a grouped run removes are left out of the original (their comments counted),
    # and the statement kept for a group compared under the name the group's last assigned.
    joins = _Joins.of(old_tree, old, rewritten)
    old_body = [statement for statement in old_tree.body if id(statement) not in joins.removed]
    if len(old_body) != len(new_tree.body):
        raise RewriteError("the rewrite would change code outside the chain")
    old_comments, new_comments = _fragments(_between(old, old_tree)), _fragments(_between(new, new_tree))
    old_blank, new_blank = _Blank(old, old_chains, joins), _Blank(new, new_chains)
    old_steps, new_steps = _Steps(old_chains), _Steps(new_chains)
    for statement in old_tree.body:
        if id(statement) in joins.removed:
            _tokens(old, statement, old_steps, old_comments)
    gone = _Lines(joins.lines)
    touched = _Lines([(c.span.line, c.span.end_line) for c in old_chains])
    for before, after in zip(old_body, new_tree.body):
        if touched.meeting(before.lineno, before.end_lineno or before.lineno):
            # Statements holding a chain: every token outside the steps unchanged (comments may
            # move with their step, but none may change, vanish or swallow code), the same
            # `ast` once the chains are blanked out, and the text must read through libcst.
            old_code = _tokens(old, before, old_steps, old_comments, gone, joins.names)
            new_code = _tokens(new, after, new_steps, new_comments)
            if old_code != new_code:
                raise RewriteError("the rewrite would change code outside the chain's steps")
            if ast.dump(old_blank.visit(before)) != ast.dump(new_blank.visit(after)):
                raise RewriteError("the rewrite would change code outside the chain")
            try:
                libcst.parse_statement(_text(new, after))
            except libcst.ParserSyntaxError as error:
                raise RewriteError(f"libcst cannot parse the rewritten code: {error.message}") from None
        elif _text(old, before) != _text(new, after):
            # The others are text the edit did not touch; equal text at a statement
            # boundary parses to the same tree.
            raise RewriteError("the rewrite would change code outside the chain")
    if old_comments != new_comments:
        raise RewriteError("the rewrite would change, lose or split a comment")


def _text(source: SourceText, statement: ast.stmt) -> str:
    return "".join(source.lines[statement.lineno - 1 : statement.end_lineno])


def _between(source: SourceText, tree: ast.Module) -> list[str]:
    """The non-blank lines outside every top-level statement: comments between statements."""
    inside = [False] * (len(source.lines) + 1)
    for statement in tree.body:
        for line in range(statement.lineno, (statement.end_lineno or statement.lineno) + 1):
            inside[line] = True
    return [text.strip() for number, text in enumerate(source.lines, 1) if not inside[number] and text.strip()]


def _fragments(comments: Sequence[str]) -> Counter[str]:
    """Comments as the pieces between their `#`s: a step's comment may be joined to a
    `# chainlint:` comment that stays on its line, and still be the same comment."""
    return Counter(piece.strip() for comment in comments for piece in comment.split("#") if piece.strip())


class _Steps:
    """The spans of the chains' steps, by start, with the furthest end reached so far: whether
    a step holds a piece of text is one bisection, however many steps a statement holds."""

    def __init__(self, chains: Sequence[Chain]) -> None:
        spans = sorted(((s.span.line, s.span.column), (s.span.end_line, s.span.end_column)) for c in chains for s in c.steps)
        self.starts = [start for start, _ in spans]
        self.reach: list[tuple[int, int]] = []
        for _, end in spans:
            self.reach.append(max(end, self.reach[-1]) if self.reach else end)

    def holds(self, start: tuple[int, int], end: tuple[int, int]) -> bool:
        """Whether a step starts at or before `start` and ends at or after `end`."""
        index = bisect.bisect_right(self.starts, start)
        return index > 0 and self.reach[index - 1] >= end


def _tokens(source: SourceText, statement: ast.stmt, steps: _Steps, comments: Counter[str],
            gone: _Lines | None = None, names: dict[int, str] | None = None) -> list[tuple[int, str]]:
    """A top-level statement's tokens outside the steps; its comments are added to `comments`.
    In the original of a grouped run: tokens on the lines of statements removed (`gone`) are
    left out, and the first name on a kept statement's line is the one it assigns now (`names`)."""
    first = statement.lineno
    lines = iter([line.rstrip("\r\n") + "\n" for line in source.lines[first - 1 : statement.end_lineno]])
    code: list[tuple[int, str]] = []
    renamed: set[int] = set()
    try:
        for token in tokenize.generate_tokens(lambda: next(lines, "")):
            if token.type in (tokenize.NL, tokenize.INDENT, tokenize.DEDENT, tokenize.ENDMARKER):
                continue
            start = (token.start[0] + first - 1, token.start[1] + 1)
            end = (token.end[0] + first - 1, token.end[1] + 1)
            if token.type == tokenize.COMMENT:
                # Counted wherever it is: a step's comment may move into a fused mask.
                comments.update(_fragments([token.string]))
            elif steps.holds(start, end) or (gone is not None and gone.meeting(start[0], start[0])):
                continue
            elif names and token.type == tokenize.NAME and start[0] in names and start[0] not in renamed:
                renamed.add(start[0])
                code.append((token.type, names[start[0]]))
            else:
                code.append((token.type, token.string))
    except (tokenize.TokenError, SyntaxError) as error:
        raise RewriteError(f"the rewritten code cannot be read token by token: {error}") from None
    return code
