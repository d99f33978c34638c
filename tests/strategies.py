"""Hypothesis strategies for predicate IR, and renderers of IR into pandas source text.

The renderers are the tests' own: they write what a user would write (Python masks and
lambdas, or pandas query text) so that the finder can be checked against the IR it came from.
"""

from __future__ import annotations

import keyword

from hypothesis import strategies as st

from chainlint.ir import (
    And,
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
    Or,
    Range,
    StrTest,
    make_and,
    make_or,
)
from chainlint.ir.nodes import ARITH_OPS, COMPARE_OPS, INCLUSIVE

plain_names = st.sampled_from(["hub", "weight", "kind", "zone", "vehicle_type", "attempts", "é", "größe"])
odd_names = st.sampled_from(["two words", "net-weight", "año de alta", "x.y", "if", "null", "1st", "a`b"])
column_names = st.one_of(plain_names, odd_names)

finite_floats = st.floats(allow_nan=False, allow_infinity=False, width=32).map(float)
numbers = st.one_of(st.integers(-10**6, 10**6), finite_floats)
strings = st.text(st.characters(blacklist_categories=("Cs",)), max_size=6)
literal_values = st.one_of(numbers, strings, st.booleans(), st.none())
literals = literal_values.map(Literal)
named = st.sampled_from(["limit", "cfg.low", "np.pi"]).map(Named)


def comparisons(columns: st.SearchStrategy[str]) -> st.SearchStrategy[Node]:
    right = st.one_of(literals, named, columns.map(Column))
    return st.builds(Compare, st.sampled_from(COMPARE_OPS), columns.map(Column), right)


def leaves(columns: st.SearchStrategy[str]) -> st.SearchStrategy[Node]:
    column = columns.map(Column)
    return st.one_of(
        comparisons(columns),
        st.builds(Member, column, st.lists(st.one_of(literals, named), min_size=1, max_size=3).map(tuple), st.booleans()),
        st.builds(Range, column, numbers.map(Literal), numbers.map(Literal), st.sampled_from(INCLUSIVE)),
        st.builds(NullTest, column, st.booleans()),
        st.builds(
            StrTest,
            column,
            st.sampled_from(["startswith", "endswith", "contains", "match", "fullmatch"]),
            strings.map(Literal),
            st.just(()),
        ),
    )


def predicates(columns: st.SearchStrategy[str] = column_names, depth: int = 2) -> st.SearchStrategy[Node]:
    """Normal-form predicates renderable in every step form."""
    base = leaves(columns)
    if depth == 0:
        return base
    inner = predicates(columns, depth - 1)
    return st.one_of(
        base,
        inner.filter(lambda n: not isinstance(n, (Not, Member))).map(Not),
        st.lists(inner, min_size=2, max_size=3).map(make_and),
        st.lists(inner, min_size=2, max_size=3).map(make_or),
    )


def ir_trees() -> st.SearchStrategy[Node]:
    """Any IR the printer must round-trip, including arithmetic and opaque parts."""
    value = st.recursive(
        st.one_of(literals, named, column_names.map(Column), strings.map(Opaque)),
        lambda children: st.builds(Arith, st.sampled_from(ARITH_OPS), children, children),
        max_leaves=4,
    )
    compare = st.builds(Compare, st.sampled_from(COMPARE_OPS), value, value)
    options = st.lists(
        st.tuples(st.sampled_from(["case", "flags", "na", "regex"]), literals), max_size=2, unique_by=lambda kv: kv[0]
    ).map(lambda kv: tuple(sorted(kv)))
    strtest = st.builds(StrTest, column_names.map(Column), st.sampled_from(["contains", "match"]), strings.map(Literal), options)
    member = st.builds(Member, value, st.one_of(named, st.lists(literals, max_size=3).map(tuple)), st.booleans())
    rng = st.builds(Range, value, value, value, st.sampled_from(INCLUSIVE))
    leaf = st.one_of(compare, strtest, member, rng, st.builds(NullTest, value, st.booleans()),
                     st.builds(NumericTest, value, st.booleans()), strings.map(Opaque))
    return st.recursive(
        leaf,
        lambda children: st.one_of(
            children.map(Not),
            st.lists(children, min_size=2, max_size=3).map(make_and),
            st.lists(children, min_size=2, max_size=3).map(make_or),
        ),
        max_leaves=6,
    )


# -- rendering ------------------------------------------------------------------------------
def python_literal(node: Node) -> str:
    if isinstance(node, Literal):
        return repr(node.value)
    assert isinstance(node, Named)
    return node.name


def python_column(frame: str, name: str, attribute: bool) -> str:
    if attribute and name.isidentifier() and not keyword.iskeyword(name) and name not in ("index", "size", "shape", "str"):
        return f"{frame}.{name}"
    return f"{frame}[{name!r}]"


def python_mask(node: Node, frame: str, attribute: bool = True) -> str:
    """`d.a > 1`, `(d.a > 1) & ~(d.b == 2)` ..."""
    def operand(n: Node) -> str:
        if isinstance(n, Column):
            return python_column(frame, n.name, attribute)
        return python_literal(n)

    if isinstance(node, Compare):
        return f"{operand(node.left)} {node.op} {operand(node.right)}"
    if isinstance(node, Member):
        values = "[" + ", ".join(python_literal(v) for v in node.values) + "]"  # type: ignore[union-attr]
        text = f"{operand(node.operand)}.isin({values})"
        return f"~{text}" if node.negated else text
    if isinstance(node, Range):
        return f"{operand(node.operand)}.between({operand(node.low)}, {operand(node.high)}, inclusive={node.inclusive!r})"
    if isinstance(node, NullTest):
        return f"{operand(node.operand)}.{'notna' if node.negated else 'isna'}()"
    if isinstance(node, StrTest):
        return f"{operand(node.operand)}.str.{node.method}({python_literal(node.pattern)})"
    if isinstance(node, Not):
        return f"~({python_mask(node.operand, frame, attribute)})"
    if isinstance(node, (And, Or)):
        joiner = " & " if isinstance(node, And) else " | "
        return joiner.join(f"({python_mask(p, frame, attribute)})" for p in node.parts)
    raise AssertionError(node)


def query_renderable(node: Node) -> bool:
    """Query text cannot hold backticks in names, nor literal-free `isin` of names in lists."""
    return all("`" not in c and c not in ("index", "ilevel_0") for c in node.columns())


def query_text(node: Node) -> str:
    def name(n: str) -> str:
        return n if n.isidentifier() and not keyword.iskeyword(n) else f"`{n}`"

    def operand(n: Node) -> str:
        if isinstance(n, Column):
            return name(n.name)
        if isinstance(n, Named):
            return "@" + n.name
        return repr(n.value)  # type: ignore[attr-defined]

    if isinstance(node, Compare):
        return f"{operand(node.left)} {node.op} {operand(node.right)}"
    if isinstance(node, Member):
        values = "[" + ", ".join(operand(v) for v in node.values) + "]"  # type: ignore[union-attr]
        return f"{operand(node.operand)} {'not in' if node.negated else 'in'} {values}"
    if isinstance(node, Range):
        return f"{operand(node.operand)}.between({operand(node.low)}, {operand(node.high)}, inclusive={node.inclusive!r})"
    if isinstance(node, NullTest):
        return f"{operand(node.operand)}.{'notna' if node.negated else 'isna'}()"
    if isinstance(node, StrTest):
        return f"{operand(node.operand)}.str.{node.method}({operand(node.pattern)})"
    if isinstance(node, Not):
        return f"not ({query_text(node.operand)})"
    if isinstance(node, (And, Or)):
        joiner = " and " if isinstance(node, And) else " | "
        return joiner.join(f"({query_text(p)})" for p in node.parts)
    raise AssertionError(node)
