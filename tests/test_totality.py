"""The totality judgement against pandas itself.

For random frames of many dtypes and random predicates, pandas (the reference) evaluates each
predicate as a filter step on the whole frame and on random subsets of its rows (the empty one
included). A step judged `any` must, wherever it returns on a subset, return on the whole frame
with the same answer for the subset's rows (it may move earlier); a step judged `later` must,
wherever it returns on the whole frame, return on every subset with the same answers (it may
move later). The predicates are rendered as a user writes them: lambda masks, and query text
(pandas' default engine here, the python one: numexpr is not installed).
"""

from __future__ import annotations

import decimal
import math
import warnings

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from chainlint.ir import And, Arith, Column, Compare, Literal, Member, Node, Not, NullTest, NumericTest, Or, Range, StrTest
from chainlint.plan.totality import ANY, LATER, STAYS, column_kind, judge


def _frame(rows: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)

    def holes(values, share=0.25):  # type: ignore[no-untyped-def]
        values = np.array(values, dtype=object)
        values[rng.random(rows) < share] = None
        return values

    words = np.array(["apple", "apricot", "banana", "a.b", "x"], dtype=object)[rng.integers(0, 5, rows)]
    mixed_pool = np.array([1, "a", None, 2.5, decimal.Decimal("0"), pd.Timestamp("2026-01-01"), True], dtype=object)
    times = pd.Timestamp("2026-01-01") + pd.to_timedelta(rng.integers(0, 100, rows), unit="D")
    floats = rng.normal(0, 3, rows).round(1)
    floats[rng.random(rows) < 0.2] = np.nan
    return pd.DataFrame({
        "i": rng.integers(-3, 4, rows),
        "i32": rng.integers(-3, 4, rows).astype("int32"),
        "u": rng.integers(0, 5, rows).astype("uint64"),
        "f": floats,
        "f32": (rng.normal(0, 3, rows) * 1.1).astype("float32"),
        "b": rng.random(rows) < 0.5,
        "s": pd.array(holes(words), dtype="str"),
        "ns": pd.array(holes(words), dtype="string"),
        "c": pd.Categorical(holes(words)),
        "oc": pd.Categorical(holes(words), categories=["x", "banana", "apple", "apricot", "a.b"], ordered=True),
        "t": times,
        "tz": times.tz_localize("UTC"),
        "o": pd.Series(holes(words), dtype=object),
        "mixed": mixed_pool[rng.integers(0, len(mixed_pool), rows)],
        "dec": np.array([decimal.Decimal(int(v)) for v in rng.integers(0, 3, rows)], dtype=object),
        "n": pd.array(holes(rng.integers(-2, 3, rows)), dtype="Int64"),
    })


COLUMNS = list(_frame(1, 0).columns)
LITERALS = [0, 1, -2, 2.5, 0.1, "apple", "a", "x", "2026-02-01", None, True, False, math.nan]
columns = st.sampled_from(COLUMNS).map(Column)
literals = st.sampled_from(LITERALS).map(Literal)
values = st.one_of(
    columns,
    st.builds(Arith, st.sampled_from(["+", "-", "*", "/", "//", "%", "**"]), columns, st.one_of(columns, literals)),
)
leaves = st.one_of(
    st.builds(Compare, st.sampled_from(["==", "!=", "<", ">="]), values, st.one_of(literals, columns)),
    st.builds(Member, columns, st.lists(literals, min_size=1, max_size=3).map(tuple), st.booleans()),
    st.builds(Range, columns, literals, literals, st.just("both")),
    st.builds(NullTest, values, st.booleans()),
    st.builds(NumericTest, columns, st.booleans()),
    st.builds(StrTest, columns, st.sampled_from(["startswith", "contains", "match"]),
              st.sampled_from(["a", "ap", "a.", "(?=a)", "["]).map(Literal),
              st.sampled_from([(), (("na", Literal(False)),), (("regex", Literal(False)),)])),
)
predicates = st.one_of(
    leaves,
    leaves.map(Not),
    st.lists(leaves, min_size=2, max_size=2).map(lambda p: And(tuple(p))),
    st.lists(leaves, min_size=2, max_size=2).map(lambda p: Or(tuple(p))),
)


def _python(node: Node, d: str = "d") -> str:
    """A mask as a user writes it in a lambda (the tests' own renderer)."""
    if isinstance(node, Column):
        return f"{d}[{node.name!r}]"
    if isinstance(node, Literal):
        return "float('nan')" if isinstance(node.value, float) and math.isnan(node.value) else repr(node.value)
    if isinstance(node, Arith):
        return f"({_python(node.left, d)} {node.op} {_python(node.right, d)})"
    if isinstance(node, Compare):
        return f"({_python(node.left, d)} {node.op} {_python(node.right, d)})"
    if isinstance(node, Member):
        text = f"{_python(node.operand, d)}.isin([{', '.join(_python(v, d) for v in node.values)}])"  # type: ignore[union-attr]
        return f"(~{text})" if node.negated else text
    if isinstance(node, Range):
        return f"{_python(node.operand, d)}.between({_python(node.low, d)}, {_python(node.high, d)})"
    if isinstance(node, NullTest):
        return f"{_python(node.operand, d)}.{'notna' if node.negated else 'isna'}()"
    if isinstance(node, NumericTest):
        return f"pd.to_numeric({_python(node.operand, d)}, errors='coerce').{'isna' if node.negated else 'notna'}()"
    if isinstance(node, StrTest):
        options = "".join(f", {k}={_python(v, d)}" for k, v in node.options)
        return f"{_python(node.operand, d)}.str.{node.method}({_python(node.pattern, d)}{options})"
    if isinstance(node, Not):
        return f"(~{_python(node.operand, d)})"
    joiner = " & " if isinstance(node, And) else " | "
    return "(" + joiner.join(_python(p, d) for p in node.parts) + ")"  # type: ignore[attr-defined]


def _query(node: Node) -> str | None:
    """The same predicate as `query` text (None where query text cannot say it)."""
    if isinstance(node, Column):
        return node.name
    if isinstance(node, Literal):
        return None if isinstance(node.value, float) and math.isnan(node.value) else repr(node.value)
    if isinstance(node, NumericTest):
        return None   # query text cannot call pandas' functions
    parts = [_query(child) for child in node.children()]
    if None in parts:
        return None
    if isinstance(node, (Arith, Compare)):
        return f"({parts[0]} {node.op} {parts[1]})"
    if isinstance(node, Member):
        return f"({parts[0]} {'not in' if node.negated else 'in'} [{', '.join(parts[1:])}])"  # type: ignore[arg-type]
    if isinstance(node, Range):
        return f"{parts[0]}.between({parts[1]}, {parts[2]})"
    if isinstance(node, NullTest):
        return f"{parts[0]}.{'notna' if node.negated else 'isna'}()"
    if isinstance(node, StrTest):
        options = "".join(f", {k}={v}" for (k, _), v in zip(node.options, parts[2:]))
        return f"{parts[0]}.str.{node.method}({parts[1]}{options})"
    if isinstance(node, Not):
        return f"not {parts[0]}"
    return "(" + (" and " if isinstance(node, And) else " or ").join(parts) + ")"  # type: ignore[arg-type]


def _kept(frame: pd.DataFrame, source: str, query: bool = False) -> frozenset | type:
    """The index labels a `.loc[lambda d: ...]` or `.query(...)` step keeps, or the exception
    type it raises."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            if query:
                return frozenset(frame.query(source).index)
            return frozenset(frame.loc[eval(compile(f"lambda d: {source}", "<step>", "eval"))].index)
        except Exception as error:  # noqa: BLE001 - raising is what is compared
            return type(error)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(st.integers(0, 12), st.integers(0, 2**32 - 1), predicates, st.lists(st.integers(0, 2**32 - 1), min_size=3, max_size=3))
def test_judgement_holds_in_pandas(rows, seed, predicate, subset_seeds) -> None:
    frame = _frame(rows, seed)
    dtypes = {name: str(frame[name].dtype) for name in frame.columns}
    limit = judge(predicate, dtypes)
    if limit.moves == STAYS:
        return
    forms = [(_python(predicate), False)] + ([(_query(predicate), True)] if _query(predicate) else [])
    for source, query in forms:
        whole = _kept(frame, source, query)
        for subset_seed in subset_seeds + [None]:
            if subset_seed is None:
                part = frame.iloc[:0]
            else:
                part = frame[np.random.default_rng(subset_seed).random(rows) < 0.5]
            some = _kept(part, source, query)
            if limit.moves == ANY and isinstance(some, frozenset):
                assert isinstance(whole, frozenset), (source, whole, "raises on the whole frame only")
                assert some == whole & frozenset(part.index), source
            if limit.moves == LATER and isinstance(whole, frozenset):
                assert isinstance(some, frozenset), (source, some, "raises on fewer rows only")
                assert some == whole & frozenset(part.index), source


def test_the_cases_of_the_issue_are_not_total() -> None:
    """Each hazard of a guard that an earlier step sets up, judged on the profile's dtypes."""
    from chainlint.ir.text import parse_predicate

    dtypes = {"qty": "object", "amount": "object", "base": "int64", "e": "int64", "name": "object", "c": "category",
              "w": "float32", "t": "datetime64[ns]", "mixed": "object"}
    cases = {
        "amount / qty > 2": LATER,                 # DivisionByZero on Decimal zeros
        "mixed > 3": LATER,                        # TypeError between str and int
        "mixed between 1 and 5": LATER,
        "name.str.contains('a')": STAYS,           # "Cannot mask with non-boolean array" / `.str` refusal
        "base ** e > 10": STAYS,                   # negative integer powers raise in numpy only
        "c < 'x'": LATER,                          # unordered categoricals raise
        "w * 1.1 > 3": STAYS,                      # float32: numexpr from a million elements
        "t + @delta > '2026-01-01'": LATER,        # overflow on a sentinel date
        "missing > 1": STAYS,                      # a column the profile lacks (MultiIndex columns)
    }
    for text, moves in cases.items():
        assert judge(parse_predicate(text), dtypes).moves == moves, text
    for text in ("qty != 0", "base >= 0", "e == 1"):
        assert judge(parse_predicate(text), dtypes).moves in (ANY, LATER), text
    assert judge(parse_predicate("base >= 0 and t > '2026-01-01'"), dtypes).moves == ANY


def test_dtype_names_of_profiles_and_pandas() -> None:
    # The profile's `type` is pandas' own dtype name (chainlint.profile.dtypes.pandas_type).
    assert column_kind(str(pd.Series([1]).dtype)) == column_kind("int64")
    assert column_kind(str(pd.Series(["a"]).dtype)) == column_kind("str")
    assert column_kind(str(pd.Series(pd.to_datetime(["2026-01-01"]).tz_localize("UTC")).dtype)) == column_kind("datetime64[ms]")
    assert column_kind(None) is None and column_kind("decimal128(10, 2)") == column_kind("interval")
