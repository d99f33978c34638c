"""Property tests of the finder and of the textual screen in front of it.

Random chains (random step forms, column names with spaces and non-ASCII letters, comments,
parentheses, line breaks) are rendered to source; the finder must recover exactly the steps
and predicates they were rendered from, and the screen must never hide a chain.
"""

from __future__ import annotations

from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from strategies import (
    column_names,
    predicates,
    python_mask,
    query_renderable,
    query_text,
)

from chainlint.engine.run import analyse_source
from chainlint.find.chains import find_chains
from chainlint.find.screen import Seams, find_seams
from chainlint.ir import Column, Named, NullTest, make_and
from chainlint.model import ChainForm
from chainlint.parse.source import decode_source, parse_tree

FORMS = ("loc_lambda", "getitem_lambda", "loc_mask", "getitem_mask", "query", "dropna")


@st.composite
def steps(draw):
    form = draw(st.sampled_from(FORMS))
    if form == "dropna":
        columns = draw(st.lists(column_names, min_size=1, max_size=3, unique=True))
        return form, make_and([NullTest(Column(c), True) for c in columns]), columns
    predicate = draw(predicates())
    if form == "query":
        assume(query_renderable(predicate))
    return form, predicate, None


def render_step(form: str, predicate, extra, frame: str, param: str, attribute: bool) -> str:
    if form == "dropna":
        return f".dropna(subset={extra!r})"
    if form == "query":
        return f".query({query_text(predicate)!r})"
    prefix = ".loc" if form.startswith("loc") else ""
    if form.endswith("lambda"):
        return f"{prefix}[lambda {param}: {python_mask(predicate, param, attribute)}]"
    return f"{prefix}[{python_mask(predicate, frame, attribute)}]"


SEPARATORS = ("", " ", "\n    ", "  # note ü\n    ", "\n\n    # comment\n    ")


@st.composite
def method_chains(draw):
    chosen = draw(st.lists(steps(), min_size=2, max_size=5))
    param = draw(st.sampled_from(["d", "t", "frame"]))
    attribute = draw(st.booleans())
    parts = [render_step(form, p, extra, "df", param, attribute) for form, p, extra in chosen]
    separators = draw(st.lists(st.sampled_from(SEPARATORS), min_size=len(parts), max_size=len(parts)))
    body = "df" + "".join(sep + part for sep, part in zip(separators, parts))
    prefix = draw(st.sampled_from(["", "héllo = 'wörld'  # ünïcode\n", "def f(df):\n    pass\n"]))
    source = f"import pandas as pd\n{prefix}out = (\n    {body}\n)\nprint(out)\n"
    return source, chosen


@st.composite
def statement_runs(draw):
    groups = draw(st.lists(st.lists(steps(), min_size=1, max_size=2), min_size=2, max_size=4))
    param = draw(st.sampled_from(["d", "t"]))
    lines = []
    for number, group in enumerate(groups):
        frame = "raw" if number == 0 else "x"
        text = frame + "".join(render_step(form, p, extra, frame, param, True) for form, p, extra in group)
        lines.append(f"x = {text}")
    joiner = draw(st.sampled_from(["\n", "\n# between\n", "; "]))
    movable = [(k == 0 or not form.endswith("mask")) and _names_free(p) for group in groups for k, (form, p, _) in enumerate(group)]
    source = "if ready:\n" + "".join("    " + line + "\n" for line in joiner.join(lines).split("\n")) if joiner != "; " else joiner.join(lines) + "\n"
    return source, [step for group in groups for step in group], movable


def _names_free(predicate) -> bool:
    """Whether a predicate reads no free name: the generated names are bound nowhere, so a step
    reading one may compare with a Series and stays in place."""
    return not any(isinstance(node, Named) for node in predicate.walk())


def _single_chain(source: str):
    result = analyse_source(decode_source("generated.py", source.encode("utf-8")))
    assert result.errors == ()
    assert len(result.chains) == 1, source
    return result.chains[0]


@settings(max_examples=120, deadline=None, suppress_health_check=[*settings.default.suppress_health_check, HealthCheck.filter_too_much])
@given(method_chains())
def test_method_chains_are_recovered_exactly(case) -> None:
    source, chosen = case
    chain = _single_chain(source)
    assert [s.kind.value for s in chain.steps] == [form for form, _, _ in chosen]
    assert [s.predicate for s in chain.steps] == [p for _, p, _ in chosen]
    # A mask after the first step reads `df`, an earlier frame: an outer mask, a barrier.
    expected = [(i == 0 or not form.endswith("mask")) and _names_free(p) for i, (form, p, _) in enumerate(chosen)]
    assert [s.movable for s in chain.steps] == expected


@settings(max_examples=80, deadline=None, suppress_health_check=[*settings.default.suppress_health_check, HealthCheck.filter_too_much])
@given(statement_runs())
def test_statement_runs_are_recovered_exactly(case) -> None:
    source, chosen, movable = case
    chain = _single_chain(source)
    assert chain.form is ChainForm.STATEMENTS
    assert [s.predicate for s in chain.steps] == [p for _, p, _ in chosen]
    # A mask after a statement's first step reads the statement's input: an outer mask.
    assert [s.movable for s in chain.steps] == movable


def _chains_without_screen(source: str):
    text = decode_source("generated.py", source.encode("utf-8"))
    return find_chains(text, parse_tree(text), Seams(None))


@settings(max_examples=120, deadline=None, suppress_health_check=[*settings.default.suppress_health_check, HealthCheck.filter_too_much])
@given(st.one_of(method_chains(), statement_runs()), st.data())
def test_screen_never_hides_a_chain(case, data) -> None:
    source = case[0]
    # Cut the generated program down at a random statement boundary or mangle a seam, then
    # compare the screened finder with a finder that walks every statement.
    lines = source.split("\n")
    keep = data.draw(st.integers(1, len(lines)))
    variant = "\n".join(lines[:keep]) + "\n"
    try:
        unscreened = _chains_without_screen(variant)
    except Exception:
        assume(False)
    screened = analyse_source(decode_source("generated.py", variant.encode("utf-8"))).chains
    assert list(screened) == unscreened
    if unscreened:
        assert not find_seams(variant).empty


#: Names bound before the statements that may use them: masks, and a name that is none.
BINDINGS = ("m = df.b > 2", "m2 = ~(df.c == 'x')", "j = 3", "bits = x & y", "x &= y")
#: Masks bound to names and used as a later step, boolean columns as a later step, written
#: masks, and look-alikes that are none: what the screen must see by a name or by `&`.
USES = (
    "use(df[df.a > 1][m])",
    "use(df.query('a > 1')[ m2 ])",
    "use(\n    df[df.a > 1]  # note\n    [m]\n)",
    "use(df[df.a > 1]\\\n    [df.flag])",
    "use(df[df.a > 1][df['flag']].loc[lambda d: d.b > 2])",
    "use(df.dropna(subset=['a'])[df.flag][m])",
    "use(rows[i][j])",
    "use(t[self.row][self.col])",
    "use(df[(df.a > 1) & (df.b < 2)])",
    "use(df.loc[lambda d: (d.a > 1)\n    & (d.b < 2)])",
    "use(df.query('a > 1 and b < 2'))",
    "use(df.query(\"a > 1 \" \"and b < 2\"))",
    "use(df[(df.a > 1) & (df.b > df.b.mean())])",
    "use(df[m])",
)


@settings(max_examples=150, deadline=None, suppress_health_check=[*settings.default.suppress_health_check, HealthCheck.filter_too_much])
@given(st.lists(st.sampled_from(BINDINGS), max_size=3), st.lists(st.sampled_from(USES), min_size=1, max_size=3), st.booleans())
def test_screen_sees_later_names_and_written_masks(bindings, uses, in_function) -> None:
    body = "\n".join([*bindings, *uses])
    if in_function:
        body = "def f(df):\n" + "\n".join("    " + line for line in body.split("\n"))
    source = "import pandas as pd\n" + body + "\n"
    screened = analyse_source(decode_source("generated.py", source.encode("utf-8"))).chains
    assert list(screened) == _chains_without_screen(source), source
