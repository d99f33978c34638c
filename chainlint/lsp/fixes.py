"""Quick fixes for findings, as edits of the analysed text (1-based lines, character columns).

- `reorder`: the verified rewrite into the planned order (the same edit as `check --fix`);
- `never-matches`: the literal replaced by each known value the finding suggests, in a Python
  string or number or inside a `.query` text, when the step spells it exactly once;
- every rule: `# chainlint: keep RULE` on a line of its own above the chain (or the rule added
  to a keep comment already there), checked to leave the statement's `ast` unchanged.
"""

from __future__ import annotations

import ast
import io
import re
import tokenize
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

from chainlint.engine.check import PlannedChain
from chainlint.engine.document import DocumentAnalysis
from chainlint.find.origins import KEEP_COMMENT, directive_near, keep_comment
from chainlint.model import Chain, Edit, Finding, Span
from chainlint.parse.source import SourceText
from chainlint.plan.groups import describe
from chainlint.engine.fixes import fix_finding


@dataclass(frozen=True)
class Fix:
    title: str
    rule: str
    edits: tuple[Edit, ...]
    preferred: bool = False


def fixes_for(analysis: DocumentAnalysis, finding: Finding) -> list[Fix]:
    """Every quick fix of one finding, best first."""
    planned = _chain_of(analysis.planned, finding)
    found: list[Fix] = []
    fixed = finding if planned is None else fix_finding(analysis.source, planned.chain, finding)
    if fixed.fix is not None:
        found.append(Fix(fix_title(finding.groups), finding.rule, (fixed.fix,), True))
    if finding.suggestions:
        found.extend(_literal_fixes(analysis.source, finding))
    if planned is not None:
        keep = _keep_fix(analysis, planned.chain, finding.rule)
        if keep is not None:
            found.append(keep)
    return found


def fix_title(groups: tuple[tuple[int, ...], ...] | None) -> str:
    """The title of a `reorder` fix: the plan in words once it fuses steps into one mask."""
    if groups is None or all(len(group) == 1 for group in groups):
        return "chainlint: put the filters in the planned order"
    return f"chainlint: run the filters as {describe(groups)}"


def _chain_of(planned: tuple[PlannedChain, ...], finding: Finding) -> PlannedChain | None:
    def inside(span: Span, outer: Span) -> bool:
        return (outer.line, outer.column) <= (span.line, span.column) and (span.end_line, span.end_column) <= (outer.end_line, outer.end_column)

    return next((p for p in planned if inside(finding.span, p.chain.span)), None)


def _offset(source: SourceText, line: int, column: int) -> int:
    return source.line_starts[line - 1] + column - 1


def _edit(source: SourceText, start: int, end: int, text: str) -> Edit:
    line, column = source.position(start)
    end_line, end_column = source.position(end)
    return Edit(start, end, text, Span(line, column, end_line, end_column))


# -- never-matches: replace the literal ------------------------------------------------------

_QUOTES = ("'", '"')


def _literal_fixes(source: SourceText, finding: Finding) -> list[Fix]:
    start = _offset(source, finding.span.line, finding.span.column)
    end = _offset(source, finding.span.end_line, finding.span.end_column)
    places = list(_places(source.text[start:end], finding.literal))
    if len(places) != 1:  # not found, or written twice in the step: which one is meant is unclear
        return []
    ((offset, length, quote),) = places
    fixes = []
    for value in finding.suggestions:
        text = _spelled(value, quote)
        if text is not None:
            edit = _edit(source, start + offset, start + offset + length, text)
            fixes.append(Fix(f"chainlint: replace {finding.literal!r} with {value!r}", finding.rule, (edit,)))
    return fixes


def _spelled(value: Any, quote: str | None) -> str | None:
    """The literal's new text in the place's quotes (None: the value cannot be written there)."""
    if isinstance(value, bool) or not isinstance(value, (str, int, float)):
        return None
    if quote is None:
        return None if isinstance(value, str) else repr(value)
    if not isinstance(value, str) or any(c in value for c in "\\'\"\r\n"):
        return None
    return quote + value + quote


def _places(text: str, literal: Any) -> Iterator[tuple[int, int, str | None]]:
    """(offset, length, quote) of each spelling of `literal` in a step's text: a Python string or
    number token, or a quoted string or number inside a plain string (a `.query` text)."""
    if isinstance(literal, bool) or not isinstance(literal, (str, int, float)):
        return
    lines = text.splitlines(keepends=True)
    starts = [0]
    for line in lines:
        starts.append(starts[-1] + len(line))
    try:
        tokens = list(tokenize.generate_tokens(io.StringIO(text).readline))
    except (tokenize.TokenError, SyntaxError):
        return
    for token in tokens:
        offset = starts[token.start[0] - 1] + token.start[1]
        length = starts[token.end[0] - 1] + token.end[1] - offset
        if token.type == tokenize.NUMBER and not isinstance(literal, str):
            if _value(token.string) == literal:
                yield offset, length, None
        elif token.type == tokenize.STRING:
            prefix = re.match(r"[A-Za-z]*", token.string).group(0)  # type: ignore[union-attr]
            body = token.string[len(prefix):]
            if prefix.lower() not in ("", "u") or body[:3] in ('"""', "'''"):
                continue
            inner = body[1:-1]
            if "\\" in inner:
                continue
            if isinstance(literal, str) and inner == literal:
                yield offset, length, body[0]
            else:
                yield from ((offset + len(prefix) + 1 + at, size, quote) for at, size, quote in _in_query(inner, literal))


def _in_query(query: str, literal: Any) -> Iterator[tuple[int, int, str | None]]:
    if isinstance(literal, str):
        for quote in _QUOTES:
            if quote in literal:
                continue
            for match in re.finditer(re.escape(quote + literal + quote), query):
                yield match.start(), len(match.group(0)), quote
        return
    for match in re.finditer(r"(?<![\w.])\d[\w.]*", query):
        if _value(match.group(0)) == literal:
            yield match.start(), len(match.group(0)), None


def _value(text: str) -> Any:
    try:
        return ast.literal_eval(text)
    except (ValueError, SyntaxError):
        return None


# -- keep as written: a comment ---------------------------------------------------------------

def _keep_fix(analysis: DocumentAnalysis, chain: Chain, rule: str) -> Fix | None:
    source = analysis.source
    line = chain.span.line
    # A keep comment the finder already reads that names rules: add this one to them.
    named = directive_near(source.lines, line, lambda text: KEEP_COMMENT.search(text) if keep_comment(text) else None)
    if named is not None:
        number, match = named
        at = _offset(source, number, 1) + match.start(1) + len(match.group(1).rstrip())
        edit = _edit(source, at, at, " " + rule)
    else:
        first = source.lines[line - 1]
        indent = first[: len(first) - len(first.lstrip(" \t"))]
        newline = first[len(first.rstrip("\r\n")):] or "\n"
        at = _offset(source, line, 1)
        edit = _edit(source, at, at, f"{indent}# chainlint: keep {rule}{newline}")
    if not _same_code(analysis, edit, line):
        return None
    return Fix(f"chainlint: keep as written (# chainlint: keep {rule})", rule, (edit,))


def _same_code(analysis: DocumentAnalysis, edit: Edit, line: int) -> bool:
    """Whether the edited statement (the whole text when its statement is not known) has the
    same `ast` as before: the edit only added a comment."""
    source = analysis.source
    first, last = next(((a, b) for a, b in analysis.statements if a <= line <= b), (1, len(source.lines)))
    first = min(first, edit.span.line)
    start = source.line_starts[first - 1]
    end = source.line_starts[last] if last < len(source.line_starts) else len(source.text)
    before = source.text[start:end]
    after = before[: edit.start - start] + edit.text + before[edit.end - start :]
    try:
        return ast.dump(ast.parse(before)) == ast.dump(ast.parse(after))
    except (SyntaxError, ValueError, RecursionError, MemoryError):
        return False
