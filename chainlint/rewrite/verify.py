"""Prove an edited file is the original with exactly the chains' steps permuted.

In the spirit of a formatter's AST-equivalence check: the new file must parse with `ast`, and
every rewritten top-level statement with libcst (the rest is text the edit did not touch);
outside the rewritten chains its `ast` must equal the original's (top-level
statements that hold no chain must keep their exact text); and the finder, run again, must see
each chain with the same predicates in the planned order and its barriers where they were.
"""

from __future__ import annotations

import ast
from collections.abc import Sequence

import libcst

from chainlint.analysis.model import Chain
from chainlint.find.chains import find_chains
from chainlint.find.screen import find_seams
from chainlint.parse.source import SourceError, SourceText, parse_tree, text_source
from chainlint.rewrite.permute import RewriteError

_PLACEHOLDER = "__chainlint_chain__"


class _Blank(ast.NodeTransformer):
    """Replace each chain with a placeholder name, so that the rest can be compared."""

    def __init__(self, source: SourceText, chains: Sequence[Chain]) -> None:
        self.starts: set[tuple[int, int]] = set()
        self.runs: list[tuple[int, int]] = []
        for chain in chains:
            if chain.form == "statements":
                self.runs.append((chain.span.line, chain.span.end_line))
            else:
                line = source.lines[chain.span.line - 1]
                self.starts.add((chain.span.line, len(line[: chain.span.column - 1].encode("utf-8"))))

    def visit(self, node: ast.AST) -> ast.AST:
        if isinstance(node, (ast.Subscript, ast.Call)) and (node.lineno, node.col_offset) in self.starts:
            self.starts.discard((node.lineno, node.col_offset))
            return ast.Name(id=_PLACEHOLDER, ctx=ast.Load())
        if isinstance(node, ast.Assign) and any(first <= node.lineno <= last for first, last in self.runs):
            node.value = ast.Name(id=_PLACEHOLDER, ctx=ast.Load())
            return node
        return self.generic_visit(node)


def _chain_at(chains: Sequence[Chain], line: int, column: int) -> Chain | None:
    return next((c for c in chains if (c.span.line, c.span.column) == (line, column)), None)


def verify(old: SourceText, new_text: str, rewritten: Sequence[tuple[Chain, tuple[int, ...]]]) -> None:
    """Raise RewriteError unless `new_text` is `old` with the chains permuted as planned."""
    new = text_source(old.path, new_text, old.encoding)
    try:
        new_tree = parse_tree(new)
    except SourceError as error:
        raise RewriteError(f"the rewritten file does not parse: {error.message}") from None
    old_chains = [chain for chain, _ in rewritten]
    found = find_chains(new, new_tree, find_seams(new_text))
    new_chains = []
    for chain, order in rewritten:
        again = _chain_at(found, chain.span.line, chain.span.column)
        if again is None or len(again.steps) != len(chain.steps):
            raise RewriteError(f"after rewriting, the chain at line {chain.span.line} is not found again")
        expected = [chain.steps[i] for i in order]
        for before, after in zip(expected, again.steps):
            if before.predicate != after.predicate or before.movable != after.movable:
                raise RewriteError(f"after rewriting, a step of the chain at line {chain.span.line} reads differently")
        new_chains.append(again)
    old_tree = parse_tree(old)
    if len(old_tree.body) != len(new_tree.body):
        raise RewriteError("the rewrite would change code outside the chain")
    old_blank, new_blank = _Blank(old, old_chains), _Blank(new, new_chains)
    for before, after in zip(old_tree.body, new_tree.body):
        if _touches(before, old_chains):
            # Statements holding a chain: equal once the chains are blanked out, and the
            # rewritten text must read through libcst, the lossless parser.
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


def _touches(statement: ast.stmt, chains: Sequence[Chain]) -> bool:
    last = statement.end_lineno or statement.lineno
    return any(c.span.line <= last and c.span.end_line >= statement.lineno for c in chains)


def _text(source: SourceText, statement: ast.stmt) -> str:
    return "".join(source.lines[statement.lineno - 1 : statement.end_lineno])
