"""The edit that puts a chain into a plan of groups: steps run in turn, neighbours fused into one mask.

First the steps are put into the plan's order by `chainlint.rewrite.permute` (comments follow
their steps, masks that change frame become lambdas); then each group of two or more steps is
written as one step in the chain's own form: `.loc[lambda d: (A) & (B)]` (or `[...]`, as the
group's first step is written) for lambdas and masks, each predicate written over the group's
lambda parameter (the user's text kept where a mask already filters the frame it names:
`df[(df.a > 1) & (df.b < 2)]`), and `.query("A and B")` for queries. A comment a step owned
follows its predicate inside the mask (in a query, between the pieces of an implicitly joined
string). In a statement run a group is one statement (`chainlint.rewrite.runs`). Whatever
cannot be written so is refused with the reason.
"""

from __future__ import annotations

import ast
import io
import re
import tokenize
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

from chainlint.find.joining import query_text
from chainlint.ir import Or
from chainlint.model import Chain, ChainForm, Edit, Span, Step, StepKind
from chainlint.parse.source import SourceText
from chainlint.rewrite.permute import RewriteError, in_class_body, chain_edit, line_break, line_start, step_slots

Groups = Sequence[Sequence[int]]
#: Writes the steps at positions first..last of a chain found again as one group: an Edit.
GroupWriter = Callable[[SourceText, Chain, Any, int, int], Edit]
_BETWEEN = re.compile(r"[ \t\r\n\\]*")
_CLASS_BODY = "a mask would become a lambda in a class body, where a lambda cannot see the class's names; write the steps as lambdas"


@dataclass(frozen=True)
class Started:
    """A plan that fuses steps, begun: `moved` puts the steps into the plan's order (None when
    they are in it already); the chain must then be found again in the moved text
    (`chainlint.rewrite.plans`, for every chain of a file at once) and its groups fused."""

    chain: Chain
    groups: tuple[tuple[int, ...], ...]
    moved: Edit | None


def start_plan(source: SourceText, chain: Chain, groups: Groups) -> Edit | Started:
    """The edit that applies `groups` (step indices, each group run as one mask, in order), or,
    for a plan that fuses steps, its first half."""
    groups = [sorted(group) for group in groups]
    order = tuple(i for group in groups for i in group)
    if chain.form is ChainForm.MASK:
        return _split_edit(source, chain, groups)
    if all(len(group) == 1 for group in groups):
        return chain_edit(source, chain, order)
    if sorted(order) != list(range(len(chain.steps))):
        raise RewriteError("the plan does not hold each of the chain's steps once")
    for group in groups:
        if len(group) > 1 and any(not chain.steps[i].movable for i in group):
            raise RewriteError("a step that may not move cannot join a mask")
    moved = chain_edit(source, chain, order) if order != tuple(range(len(chain.steps))) else None
    return Started(chain, tuple(tuple(group) for group in groups), moved)


def fused_edits(permuted: SourceText, again: Chain, groups: Groups, write: GroupWriter | None = None) -> list[Edit]:
    """The edits of `permuted` that write each group of two or more steps of `again` (the chain
    found again there, its steps in the plan's order) as one mask, by `write` (a method
    chain's by default; a statement run passes its own)."""
    write = write or _group_edit
    fused: list[Edit] = []
    position = 0
    slots = step_slots(permuted, again)
    for group in groups:
        if len(group) > 1:
            fused.append(write(permuted, again, slots, position, position + len(group) - 1))
        position += len(group)
    return fused


@dataclass(frozen=True)
class _Part:
    """One step of a group: its predicate's text over `param` (None: a mask over `name`)."""

    text: str
    node: ast.expr
    param: str | None
    name: str | None
    opener: str


def _group_edit(source: SourceText, chain: Chain, slots, first: int, last: int) -> Edit:  # type: ignore[no-untyped-def]
    text = source.text
    steps = chain.steps[first : last + 1]
    comments: list[tuple[list[str], str]] = []  # per step: comment lines above it, comment after it
    for k in range(first, last + 1):
        slot = slots[k]
        if k < last and slot.fixed:
            raise RewriteError("a `# chainlint:` comment inside the steps to fuse would change what it applies to")
        lead = text[slot.lead_start : slot.anchor].splitlines() if k > first and slot.anchor >= 0 else []
        comments.append(([line.strip() for line in lead if line.strip()], slot.trail.strip() if k < last else ""))
    for k in range(first, last):
        between = text[slots[k].end : slots[k + 1].start]
        for piece in [slots[k].trail] + [text[slots[k + 1].lead_start : slots[k + 1].anchor]] * (slots[k + 1].anchor >= 0):
            if piece:
                between = between.replace(piece, "", 1)
        if not _BETWEEN.fullmatch(between):
            raise RewriteError("code between the steps to fuse cannot be kept")
    start, end = slots[first].start, slots[last].end
    prefix = text[line_start(source, start) : start]
    indent = (prefix[: len(prefix) - len(prefix.lstrip())] if prefix.strip() == "" else re.match(r"[ \t]*", prefix).group()) + "    "  # type: ignore[union-attr]
    families = {"query" if s.kind is StepKind.QUERY else "mask" for s in steps}
    if len(families) != 1 or any(s.kind is StepKind.DROPNA for s in steps):
        raise RewriteError("only lambdas and masks, or only queries, are fused into one mask")
    if families == {"query"}:
        body = query_group(source, steps, comments, indent).replace("\n", line_break(text))
    else:
        body = mask_group(source, steps, comments, indent).replace("\n", line_break(text))
    line, column = source.position(start)
    end_line, end_column = source.position(end)
    return Edit(start, end, body, Span(line, column, end_line, end_column))


def _step_text(source: SourceText, step: Step) -> str:
    span = step.span
    return source.text[_offset(source, span.line, span.column) : _offset(source, span.end_line, span.end_column)]


def _offset(source: SourceText, line: int, column: int) -> int:
    return source.line_starts[line - 1] + column - 1


def _parsed(text: str) -> tuple[str, ast.expr]:
    """The step's text after a placeholder frame, and its `ast` (`.loc[...]`, `[...]`, `.query(...)`)."""
    code = "_" + text
    try:
        tree = ast.parse("(" + code + "\n)", mode="eval")
    except SyntaxError:
        raise RewriteError("a step to fuse cannot be read on its own") from None
    if _has_comment(code):
        raise RewriteError("a comment inside a step to fuse has no place in one mask")
    return code, tree.body


def _has_comment(code: str) -> bool:
    try:
        return any(t.type == tokenize.COMMENT for t in tokenize.generate_tokens(io.StringIO("(" + code + "\n)").readline))
    except (tokenize.TokenError, SyntaxError):
        return True


def _segment(code: str, node: ast.AST) -> str:
    """The source of `node` in `"(" + code`, whose first line is shifted by one character."""
    lines = ("(" + code).splitlines(keepends=True)
    first, last = node.lineno - 1, node.end_lineno - 1  # type: ignore[attr-defined]
    if first == last:
        return lines[first][node.col_offset : node.end_col_offset]  # type: ignore[attr-defined]
    return "".join([lines[first][node.col_offset :], *lines[first + 1 : last], lines[last][: node.end_col_offset]])  # type: ignore[attr-defined]


def _mask_part(source: SourceText, step: Step) -> _Part:
    code, tree = _parsed(_step_text(source, step))
    if not isinstance(tree, ast.Subscript):
        raise RewriteError("a step to fuse is not a subscript")
    opener = "[" if isinstance(tree.value, ast.Name) else ".loc["
    key = tree.slice
    if isinstance(key, ast.Tuple) and len(key.elts) == 2 and isinstance(key.elts[1], ast.Slice):
        key = key.elts[0]  # `.loc[mask, :]`: every column
    if isinstance(key, ast.Lambda):
        param = key.args.args[0].arg
        return _Part(_segment(code, key.body), key.body, param, None, opener)
    return _Part(_segment(code, key), key, None, step.mask_name, opener)


def _renamed(part: _Part, old: str, new: str) -> str:
    """The part's text with the frame name `old` written `new` (refused where a name inside
    could be shadowed or taken)."""
    if old == new:
        return part.text
    names = [n for n in ast.walk(part.node) if isinstance(n, ast.Name)]
    if any(isinstance(n, (ast.Lambda, ast.comprehension, ast.NamedExpr)) for n in ast.walk(part.node)):
        raise RewriteError("a step to fuse binds names of its own; write it over the same lambda parameter")
    if any(n.id == new for n in names):
        raise RewriteError(f"a step to fuse already reads a name `{new}`")
    tree = ast.parse("(" + part.text + "\n)", mode="eval")
    lines = ("(" + part.text).splitlines(keepends=True)
    spots = sorted(((n.lineno, n.col_offset, n.end_col_offset) for n in ast.walk(tree) if isinstance(n, ast.Name) and n.id == old), reverse=True)
    for line, begin, finish in spots:
        lines[line - 1] = lines[line - 1][:begin] + new + lines[line - 1][finish:]
    return "".join(lines)[1:]


def _wrapped(text: str, node: ast.expr) -> str:
    atom = isinstance(node, (ast.Call, ast.Attribute, ast.Subscript, ast.Name))
    return text if atom else f"({text})"


def mask_group(source: SourceText, steps: Sequence[Step], comments, indent: str) -> str:  # type: ignore[no-untyped-def]
    parts = [_mask_part(source, step) for step in steps]
    own = steps[0].own
    if all(p.param is None and p.name is not None and p.name == own for p in parts):
        opener, texts = parts[0].opener, [p.text for p in parts]
    else:
        if any(p.param is None for p in parts) and in_class_body(source.text, _offset(source, steps[0].span.line, steps[0].span.column)):
            raise RewriteError("a mask would become part of a lambda in a class body, where a lambda cannot see the class's names")
        # The one name every part reads its frame by (a mask moved is written as a lambda over
        # that name), else `d`.
        names = {p.param or p.name for p in parts}
        param = (names.pop() if len(names) == 1 else None) or "d"
        if not param.isidentifier():
            param = "d"
        taken = {n.id for p in parts for n in ast.walk(p.node) if isinstance(n, ast.Name) and n.id != (p.param or p.name)}
        while param in taken:
            param += "_"
        opener = parts[0].opener + f"lambda {param}: "
        texts = [_renamed(p, p.param or p.name or "", param) for p in parts]
    pieces = [_wrapped(t, p.node) for t, p in zip(texts, parts)]
    return opener + _joined(pieces, comments, " & ", indent) + "]"


def _joined(pieces: list[str], comments, joiner: str, indent: str, close: str = "") -> str:  # type: ignore[no-untyped-def]
    """Pieces joined on one line, or one a line when a comment must follow one of them."""
    if not any(lead or trail for lead, trail in comments) and not any("\n" in p or "\r" in p for p in pieces):
        return joiner.join(pieces)
    out = pieces[0]
    for k in range(1, len(pieces)):
        trail = comments[k - 1][1]
        out += (f"  {trail}" if trail else "") + "\n"
        for line in comments[k][0]:
            out += f"{indent}{line}\n"
        out += indent + joiner.lstrip() + pieces[k]
    return out


def query_group(source: SourceText, steps: Sequence[Step], comments, indent: str) -> str:  # type: ignore[no-untyped-def]
    texts, keywords = [], None
    for step in steps:
        code, tree = _parsed(_step_text(source, step))
        literal = query_text(tree) if isinstance(tree, ast.Call) else None
        if literal is None:
            raise RewriteError("a query to fuse does not hold its text as one literal")
        mine = [_segment(code, k) for k in tree.keywords if k.arg != "expr"]  # type: ignore[attr-defined]
        if keywords is not None and mine != keywords:
            raise RewriteError("queries to fuse pass different options")
        keywords = mine
        value = literal.value
        texts.append(f"({value})" if isinstance(step.predicate, Or) else value)
    if any("\n" in t or "\r" in t for t in texts):
        raise RewriteError("a query to fuse holds a line break")
    # The joined text is the same string value whatever the quotes: a backslash or the quote
    # inside it is escaped (Python's string literal rules).
    quote = '"' if not any('"' in t for t in texts) else "'"
    texts = [t.replace("\\", "\\\\").replace(quote, "\\" + quote) for t in texts]
    if any(lead or trail for lead, trail in comments):
        literal = quote + texts[0] + quote
        for k in range(1, len(texts)):
            trail = comments[k - 1][1]
            literal += (f"  {trail}" if trail else "") + "\n"
            literal += "".join(f"{indent}{line}\n" for line in comments[k][0])
            literal += f"{indent}{quote} and {texts[k]}{quote}"
    else:
        literal = quote + " and ".join(texts) + quote
    rest = "".join(", " + k for k in keywords or [])
    return f".query({literal}{rest})"


def _split_edit(source: SourceText, chain: Chain, groups: list[list[int]]) -> Edit:
    """A mask written whole (`df[(a) & (b) & (c)]`, form `mask`: its conjuncts are the steps,
    each with the span of its text inside the mask) written as the planned groups in turn: the
    first in the written step's own form, each later one a lambda (or a query) over the rows
    the groups before it kept."""
    if sorted(i for g in groups for i in g) != list(range(len(chain.steps))):
        raise RewriteError("the plan does not hold each of the chain's steps once")
    if any(not step.movable or step.conjunct is None for step in chain.steps):
        raise RewriteError("a conjunct of the mask may not move")
    written = chain.steps[0]
    text = _step_text(source, written)
    code, tree = _parsed(text)
    texts = [source.text[_offset(source, s.conjunct.line, s.conjunct.column):  # type: ignore[attr-defined]
                         _offset(source, s.conjunct.end_line, s.conjunct.end_column)] for s in chain.steps]  # type: ignore[attr-defined]
    if any("\n" in t or "\r" in t for t in texts):
        raise RewriteError("a conjunct written on several lines is not split")
    if written.kind is StepKind.QUERY:
        if not (isinstance(tree, ast.Call) and len(tree.args) == 1 and isinstance(tree.args[0], ast.Constant)):
            raise RewriteError("the query does not hold its text as one literal")
        literal = _segment(code, tree.args[0])
        prefix = literal[: len(literal) - len(literal.lstrip("rRbBuUfF"))]
        quote = literal[len(prefix)]
        rest = "".join(", " + _segment(code, k) for k in tree.keywords)
        pieces = []
        for group in groups:
            parts = [f"({texts[i]})" if isinstance(chain.steps[i].predicate, Or) else texts[i] for i in group]
            pieces.append(f".query({prefix}{quote}{' and '.join(parts)}{quote}{rest})")
        new = "".join(pieces)
    else:
        if not isinstance(tree, ast.Subscript):
            raise RewriteError("the mask is not a subscript")
        opener = "[" if isinstance(tree.value, ast.Name) else ".loc["
        key = tree.slice
        param = key.args.args[0].arg if isinstance(key, ast.Lambda) else None
        name = param or written.mask_name or ""
        if not name.isidentifier():
            raise RewriteError(f"the mask reads `{name}`, which cannot become a lambda parameter")
        pieces = []
        for n, group in enumerate(groups):
            parts = []
            for i in group:
                node = ast.parse("(" + texts[i] + "\n)", mode="eval").body
                parts.append(_wrapped(texts[i], node) if len(group) > 1 else texts[i])
            body = " & ".join(parts)
            if n == 0 and param is None:
                pieces.append(f"{opener}{body}]")
                continue
            if param is None and in_class_body(source.text, _offset(source, written.span.line, written.span.column)):
                raise RewriteError(_CLASS_BODY)
            target = param or "d"
            if param is None:
                taken = {x.id for i in group for x in ast.walk(ast.parse("(" + texts[i] + "\n)", mode="eval")) if isinstance(x, ast.Name)}
                while target in taken:
                    target += "_"
                body = " & ".join(_renamed(_Part(p, ast.parse("(" + p + "\n)", mode="eval").body, None, name, opener), name, target)
                                  for p in parts)
            pieces.append(f"{opener}lambda {target}: {body}]")
        new = "".join(pieces)
    start = _offset(source, written.span.line, written.span.column)
    end = _offset(source, written.span.end_line, written.span.end_column)
    return Edit(start, end, new, written.span)
