"""Query text on several lines: pandas refuses it (pandas itself is the reference), so such a
step raises as written and must never move or join another."""

from __future__ import annotations

import pandas as pd
import pytest

from chainlint.engine.run import analyse_source
from chainlint.find.query import several_lines
from chainlint.parse.source import text_source

TEXTS = ["a > 1", "\n a > 1 \n", "a > 1\n and b < 2", "(a > 1\n and b < 2)", "a > 1\r\n and b < 2", "a > 1\u2028",
         "s == 'x\u2028y'", "a > 1\n\n", "s == 'x\ny'", "a > 1 and\rb < 2"]


@pytest.mark.parametrize("text", TEXTS)
def test_several_lines_is_what_pandas_refuses(text: str) -> None:
    frame = pd.DataFrame({"a": [1, 2, 3], "b": [1, 2, 3], "s": ["x", "y", "z"]})
    try:
        frame.query(text)
        refused = False
    except ValueError as error:
        refused = "multi-line expressions" in str(error)
    except SyntaxError:
        refused = False
    assert several_lines(text) == refused


def test_a_query_on_several_lines_never_moves() -> None:
    source = 'out = df.query("""a > 1\n and b < 2""").query("c == 1").query("d == 2")\n'
    (chain,) = analyse_source(text_source("m.py", source)).chains
    first = chain.steps[0]
    assert not first.movable and "several lines" in first.barrier.reason
    assert [step.movable for step in chain.steps] == [False, True, True]
