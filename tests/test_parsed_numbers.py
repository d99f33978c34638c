"""`pd.to_numeric(COLUMN, errors="coerce").notna()` as a step, against pandas itself (the
reference): on hostile dtypes it must not raise where chainlint lets it move earlier, answer
each row alone, and the estimator's reading of text must be pandas' own."""

from __future__ import annotations

import datetime as dt
import decimal

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest

from chainlint.estimate.selectivity import Basis, Estimator, reads_as_number
from chainlint.evaluate.pandas_masks import apply_step
from chainlint.ir import Column, NumericTest
from chainlint.plan.totality import ANY, LATER, STAYS, judge
from chainlint.profile.build import profile_dataset
from chainlint.profile.readers import memory_dataset
from chainlint.profile.settings import Settings
from chainlint.profile.view import Profile

TEXT = ["1", " 2 ", "1e3", "inf", "-Infinity", "nan", "NaN", "", " ", "0x10", "1_000", "abc", "+1", ".5", "5.",
        "1e", "--1", "1,000", "\t3\n", "١٢", "True", "1.2.3", "NA", "None", "9" * 400, "-0", "1e400"]

# Hostile columns (dtype by dtype) and the limit chainlint gives the step on each.
COLUMNS = {
    "mixed objects": (pd.Series([1, "2", "x", None, 3.5, True, b"7", decimal.Decimal("1.5"), dt.date(2020, 1, 1)] * 2,
                                dtype=object), STAYS),
    "containers": (pd.Series([[1], {"a": 1}, (2,), "3", {1}, 1 + 2j] * 2, dtype=object), STAYS),   # read by the others
    "a 0-d array": (pd.Series([np.array(3), "1", "x", 2] * 2, dtype=object), STAYS),    # pandas raises TypeError
    "big integers": (pd.Series([2**70, 1, "5", -2**70] * 2, dtype=object), STAYS),
    "text": (pd.Series(TEXT, dtype="str"), ANY),
    "nullable text": (pd.Series(TEXT + [None], dtype="string"), ANY),
    "pyarrow text": (pd.Series(TEXT + [None], dtype="string[pyarrow]"), ANY),
    "bools": (pd.Series([True, False] * 3), ANY),
    "nullable bools": (pd.Series([True, None, False] * 2, dtype="boolean"), STAYS),   # a kind not vouched for
    "nullable ints": (pd.Series([1, None, -4] * 2, dtype="Int64"), ANY),
    "floats": (pd.Series([1.5, np.nan, np.inf, -0.0] * 2), ANY),
    "uint64": (pd.Series([2**63, 1, 0] * 2, dtype="uint64"), ANY),
    "datetimes": (pd.Series(pd.to_datetime(["2020-01-01", None, "1970-01-01"] * 2)), ANY),
    "zoned datetimes": (pd.Series(pd.to_datetime(["2020-01-01", None] * 3).tz_localize("UTC")), ANY),
    "categorical text": (pd.Series(["1", "x", None, " 2"] * 2, dtype="category"), ANY),
    "categorical numbers": (pd.Series([1, 2, None] * 2, dtype="category"), ANY),
    "pyarrow decimals": (pd.Series([decimal.Decimal("1.5"), None] * 3, dtype=pd.ArrowDtype(pa.decimal128(5, 2))), STAYS),
    "pyarrow ints": (pd.Series([1, None, 3] * 2, dtype="int64[pyarrow]"), STAYS),
}


def _kept(frame: pd.DataFrame, negated: bool) -> frozenset | type:
    """The labels `frame.loc[lambda d: pd.to_numeric(d.x, errors="coerce").notna()]` keeps
    (`.isna()` when negated), as a user writes it, or the exception type it raises."""
    try:
        parsed = lambda d: pd.to_numeric(d["x"], errors="coerce")  # noqa: E731
        step = (lambda d: parsed(d).isna()) if negated else (lambda d: parsed(d).notna())
        return frozenset(frame.loc[step].index)
    except Exception as error:  # noqa: BLE001 - raising is what is compared
        return type(error)


@pytest.mark.parametrize("name", sorted(COLUMNS))
@pytest.mark.parametrize("negated", [False, True])
def test_the_limit_holds_in_pandas_on_hostile_dtypes(name: str, negated: bool) -> None:
    column, expected = COLUMNS[name]
    frame = pd.DataFrame({"x": column})
    limit = judge(NumericTest(Column("x"), negated), {"x": str(column.dtype)})
    assert limit.moves == expected, limit
    whole = _kept(frame, negated)
    rng = np.random.default_rng(7)
    subsets = [frame.iloc[:0], *(frame[rng.random(len(frame)) < 0.5] for _ in range(8)), *(frame.iloc[[i]] for i in range(len(frame)))]
    for part in subsets:
        some = _kept(part, negated)
        if limit.moves == ANY:   # may move earlier: never raises, and answers each row alone
            assert isinstance(whole, frozenset) and isinstance(some, frozenset), (whole, some)
            assert some == whole & frozenset(part.index)
        if limit.moves == LATER and isinstance(whole, frozenset):   # may move later: fewer rows raise no more
            assert isinstance(some, frozenset) and some == whole & frozenset(part.index)
    if name == "a 0-d array":
        assert whole is TypeError   # why an object column may not move earlier
    if name == "containers":   # why it may not move later either: a row's answer depends on the others
        assert _kept(frame.iloc[[6]], negated) != whole & frozenset(frame.index[[6]])   # `[1]` after `1+2j`


def test_chainlint_evaluates_the_step_as_pandas_does() -> None:
    frame = pd.DataFrame({"x": pd.Series(TEXT, dtype=object)})
    for negated in (False, True):
        kept = apply_step(frame, NumericTest(Column("x"), negated))
        assert frozenset(kept.index) == _kept(frame, negated)


def test_text_read_as_a_number_is_what_pandas_reads() -> None:
    parsed = pd.to_numeric(pd.Series(TEXT, dtype=object), errors="coerce").notna()
    assert [reads_as_number(value) for value in TEXT] == list(parsed)
    for value in (1, 2.5, True, float("nan"), None):
        assert reads_as_number(value) == bool(pd.notna(pd.to_numeric(pd.Series([value], dtype=object), errors="coerce"))[0])


def _estimate(column: pd.Series, negated: bool = False):  # type: ignore[no-untyped-def]
    table = pa.Table.from_pandas(pd.DataFrame({"x": column}), preserve_index=False)
    document = profile_dataset(memory_dataset(table), "t", Settings(min_count=1))
    return Estimator(Profile.from_document(document)).estimate(NumericTest(Column("x"), negated))


def test_the_estimate_from_the_profile() -> None:
    text = pd.Series(["1", "2", "x", None, "3.5", "nan"] * 50)
    truth = pd.to_numeric(text, errors="coerce").notna().mean()   # pandas: 3 of 6 rows
    estimate = _estimate(text)
    assert estimate.basis is Basis.MOST_COMMON and estimate.selectivity == pytest.approx(truth)
    assert _estimate(text, negated=True).selectivity == pytest.approx(1 - truth)
    numbers = pd.Series([1.0, None, 3.0, 4.0] * 25)
    assert _estimate(numbers).basis is Basis.EXACT
    assert _estimate(numbers).selectivity == pytest.approx(pd.to_numeric(numbers, errors="coerce").notna().mean())
    times = pd.Series(pd.to_datetime(["2020-01-01", None] * 20))
    assert _estimate(times).selectivity == pd.to_numeric(times, errors="coerce").notna().mean() == 1.0



def test_parsed_numbers_compared_stay_a_barrier_with_their_reason() -> None:
    from chainlint.engine.run import analyse_source
    from chainlint.parse.source import text_source

    source = 'import pandas as pd\nout = df.loc[lambda d: d.y > 1].loc[lambda d: pd.to_numeric(d.x, errors="coerce") > 3]\n'
    (chain,) = analyse_source(text_source("m.py", source)).chains
    assert not chain.steps[1].movable and "not modelled" in chain.steps[1].barrier.reason
