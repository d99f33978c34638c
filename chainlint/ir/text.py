"""Read canonical predicate text back into IR (the inverse of `Node.canonical`).

Profiles key their joint statistics by canonical text, so the text must be read back without
ambiguity. A small Pratt parser over our own token set does it; nothing is evaluated.
"""

from __future__ import annotations

import ast
import re

from chainlint.ir.build import make_and, make_or
from chainlint.ir.nodes import (
    COMPARE_OPS,
    INCLUSIVE,
    STRING_METHODS,
    Arith,
    Column,
    Compare,
    Literal,
    Member,
    Named,
    Node,
    Not,
    NullTest,
    NumericTest,
    Opaque,
    Range,
    RowNulls,
    StrTest,
)
from chainlint.model import ChainlintError


class PredicateSyntaxError(ChainlintError, ValueError):
    """Raised for text that is not canonical predicate text; names the offset."""


_TOKEN = re.compile(
    r"""
    (?P<space>\s+)
    | (?P<backtick>`(?:[^`]|``)*`)
    | (?P<string>'(?:[^'\\\n]|\\.)*'|"(?:[^"\\\n]|\\.)*")
    | (?P<number>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)
    | (?P<named>@[^\W\d]\w*(?:\.[^\W\d]\w*)*)
    | (?P<name>[^\W\d]\w*)
    | (?P<op>\*\*|//|==|!=|<=|>=|[<>+\-*/%(),.=])
    """,
    re.VERBOSE,
)

_ARITH_BP = {"+": 5, "-": 5, "*": 6, "/": 6, "//": 6, "%": 6, "**": 8}
_COMPARE_BP = 4


def _tokenize(text: str) -> list[tuple[str, str, int]]:
    tokens = []
    pos = 0
    while pos < len(text):
        match = _TOKEN.match(text, pos)
        if match is None:
            raise PredicateSyntaxError(f"unexpected character {text[pos]!r} at offset {pos}")
        kind = match.lastgroup or ""
        if kind != "space":
            tokens.append((kind, match.group(), pos))
        pos = match.end()
    tokens.append(("end", "", len(text)))
    return tokens


class _Parser:
    def __init__(self, text: str) -> None:
        self.tokens = _tokenize(text)
        self.index = 0

    def peek(self, ahead: int = 0) -> tuple[str, str, int]:
        return self.tokens[min(self.index + ahead, len(self.tokens) - 1)]

    def take(self) -> tuple[str, str, int]:
        token = self.peek()
        self.index += 1
        return token

    def expect(self, value: str) -> None:
        kind, text, pos = self.take()
        if text != value or kind == "string":
            raise PredicateSyntaxError(f"expected {value!r} at offset {pos}, found {text!r}")

    def fail(self, what: str) -> PredicateSyntaxError:
        kind, text, pos = self.peek()
        return PredicateSyntaxError(f"expected {what} at offset {pos}, found {text or 'the end'!r}")

    def at_word(self, word: str) -> bool:
        kind, text, _ = self.peek()
        return kind == "name" and text == word

    def parse(self) -> Node:
        node = self.expr(0)
        if self.peek()[0] != "end":
            raise self.fail("the end")
        return node

    def expr(self, min_bp: int) -> Node:
        left = self.prefix()
        while True:
            kind, text, _ = self.peek()
            if kind == "name" and text == "or" and min_bp <= 1:
                self.take()
                left = make_or([left, self.expr(2)])
            elif kind == "name" and text == "and" and min_bp <= 2:
                self.take()
                left = make_and([left, self.expr(3)])
            elif min_bp <= _COMPARE_BP and (kind == "op" and text in COMPARE_OPS):
                self.take()
                left = Compare(text, left, self.expr(_COMPARE_BP + 1))
            elif min_bp <= _COMPARE_BP and kind == "name" and text in ("in", "not", "between", "is"):
                left = self.word_predicate(left)
            elif kind == "op" and text in _ARITH_BP and min_bp <= _ARITH_BP[text]:
                self.take()
                bp = _ARITH_BP[text]
                left = Arith(text, left, self.expr(bp if text == "**" else bp + 1))
            elif kind == "op" and text == "." and min_bp <= 9:
                left = self.string_test(left)
            else:
                return left

    def prefix(self) -> Node:
        kind, text, pos = self.take()
        if kind == "name" and text == "not":
            return Not(self.expr(3))
        if kind == "op" and text == "(":
            inner = self.expr(0)
            self.expect(")")
            return inner
        if kind == "op" and text == "-" and self.peek()[0] == "number":
            return Literal(-ast.literal_eval(self.take()[1]))
        if kind == "number":
            return Literal(ast.literal_eval(text))
        if kind == "string":
            return Literal(ast.literal_eval(text))
        if kind == "named":
            return Named(text[1:])
        if kind == "backtick":
            return Column(text[1:-1].replace("``", "`"))
        if kind == "name":
            if text in ("True", "False", "None"):
                return Literal({"True": True, "False": False, "None": None}[text])
            if text == "notnull" and self.peek()[1] == "(":
                return self.row_nulls()
            if text == "opaque" and self.peek()[1] == "(":
                self.take()
                source = self.take()
                if source[0] != "string":
                    raise PredicateSyntaxError(f"expected a string at offset {source[2]}")
                self.expect(")")
                return Opaque(ast.literal_eval(source[1]))
            return Column(text)
        raise PredicateSyntaxError(f"unexpected {text or 'end'!r} at offset {pos}")

    def row_nulls(self) -> Node:
        """`notnull(*)`, `notnull(*, how='all')` or `notnull(*, thresh=N)`."""
        self.expect("(")
        self.expect("*")
        node = RowNulls()
        if self.peek()[1] == ",":
            self.take()
            key = self.take()
            self.expect("=")
            value = self.take()
            if key[1] == "how" and value[0] == "string" and ast.literal_eval(value[1]) == "all":
                node = RowNulls("all")
            elif key[1] == "thresh" and value[0] == "number" and value[1].isdigit():
                node = RowNulls("any", int(value[1]))
            else:
                raise PredicateSyntaxError(f"unexpected {key[1]!r} at offset {key[2]}")
        self.expect(")")
        return node

    def word_predicate(self, left: Node) -> Node:
        _, word, pos = self.take()
        if word == "not":
            if not self.at_word("in"):
                raise PredicateSyntaxError(f"expected 'in' after 'not' at offset {pos}")
            self.take()
            return Member(left, self.member_values(), negated=True)
        if word == "in":
            return Member(left, self.member_values())
        if word == "is":
            negated = self.at_word("not")
            if negated:
                self.take()
            if self.at_word("numeric"):
                self.take()
                return NumericTest(left, negated)
            if not self.at_word("null"):
                raise self.fail("'null' or 'numeric'")
            self.take()
            return NullTest(left, negated)
        low = self.expr(_COMPARE_BP + 1)
        if not self.at_word("and"):
            raise self.fail("'and' in 'between'")
        self.take()
        high = self.expr(_COMPARE_BP + 1)
        inclusive = "both"
        if self.at_word("inclusive"):
            self.take()
            kind, text, at = self.take()
            inclusive = ast.literal_eval(text) if kind == "string" else ""
            if inclusive not in INCLUSIVE:
                raise PredicateSyntaxError(f"unknown inclusive value {text!r} at offset {at}")
        return Range(left, low, high, inclusive)

    def member_values(self) -> tuple[Node, ...] | Named:
        kind, text, pos = self.peek()
        if kind == "named":
            self.take()
            return Named(text[1:])
        self.expect("(")
        values: list[Node] = []
        while self.peek()[1] != ")":
            values.append(self.expr(_ARITH_BP["+"]))
            if self.peek()[1] == ",":
                self.take()
            elif self.peek()[1] != ")":
                raise self.fail("',' or ')'")
        self.expect(")")
        return tuple(values)

    def string_test(self, operand: Node) -> Node:
        self.expect(".")
        if not self.at_word("str"):
            raise self.fail("'str'")
        self.take()
        self.expect(".")
        kind, method, pos = self.take()
        if method not in STRING_METHODS:
            raise PredicateSyntaxError(f"unknown string method {method!r} at offset {pos}")
        self.expect("(")
        pattern = self.expr(_ARITH_BP["+"])
        options: list[tuple[str, Node]] = []
        while self.peek()[1] == ",":
            self.take()
            _, key, _ = self.take()
            self.expect("=")
            options.append((key, self.expr(_ARITH_BP["+"])))
        self.expect(")")
        return StrTest(operand, method, pattern, tuple(options))


def parse_predicate(text: str) -> Node:
    """Parse canonical predicate text into IR; raises PredicateSyntaxError on bad text."""
    return _Parser(text).parse()
