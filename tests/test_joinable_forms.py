"""The planner offers only groups the rewriter can write.

Each case below was once offered as one mask by the planner (`plan.chains.may_join`) while
`check --fix` refused to write it, so the user was told of a speedup the tool would not apply.
Now either the finder marks the steps `apart` (the planner does not join them, and `explain`
says why) or the rewriter writes the group; a group it writes is executed beside the original
with pandas on a frame of awkward dtypes (pandas is the judge of the rows, order, columns,
dtypes and index labels). The test runs its own generated code; chainlint never executes
what it analyses.
"""

from __future__ import annotations

import itertools

import pandas as pd
import pytest

from chainlint.engine.run import analyse_source
from chainlint.model import Chain
from chainlint.parse.source import text_source
from chainlint.plan.chains import may_join
from chainlint.plan.totality import judge
from chainlint.rewrite.permute import RewriteError, apply_edits
from chainlint.rewrite.plans import plan_edit
from chainlint.rewrite.verify import verify
from test_run_groups import _frame, _run

DTYPES = {name: str(dtype) for name, dtype in _frame().dtypes.items()}


def _chain(source: str) -> Chain:
    (chain,) = analyse_source(text_source("case.py", source)).chains
    return chain


def _joinable(chain: Chain) -> list[tuple[int, ...]]:
    """Every set of two or more steps the planner may run as one mask."""
    limits = tuple(judge(step.predicate, DTYPES, "frame") if step.movable else None for step in chain.steps)
    joinable = may_join(chain, limits, DTYPES)
    sets = [c for size in range(2, len(chain.steps) + 1) for c in itertools.combinations(range(len(chain.steps)), size)]
    return [group for group in sets if joinable(sum(1 << i for i in group))]


def _rewrite(source: str, groups: list[tuple[int, ...]]) -> str:
    text = text_source("case.py", source)
    chain = _chain(source)
    new = apply_edits(source, [plan_edit(text, chain, groups)])
    verify(text, new, [(chain, groups)])
    return new


APART = {
    "a renamed run of masks in a class body would become a lambda": (
        "import pandas as pd\nclass C:\n    out = df[df.a > 1]\n    out = out[out.b < 2]\n", "class body"),
    "a mask and a lambda in a class body would become one lambda": (
        "import pandas as pd\nclass C:\n    out = df[df.a > 1].loc[lambda d: d.b < 2]\n", "class body"),
    "queries passing different options, in a method chain": (
        "import pandas as pd\nout = df.query('a > 1', engine='python').query('b < 2')\n", "options"),
    "queries passing different options, in a run": (
        "import pandas as pd\nout = df.query('a > 1')\nout = out.query('b < 2', engine='python')\n", "options"),
    "a comment inside a step": (
        "import pandas as pd\nout = (df\n    .loc[lambda d: (d.a > 1)  # inner\n    ]\n    .loc[lambda d: d.b < 2])\n", "comment inside"),
    "a directive between the steps of a method chain": (
        "import pandas as pd\nout = (df\n    .loc[lambda d: d.a > 1]\n    # chainlint: keep never-matches\n"
        "    .loc[lambda d: d.b < 2])\n", "# chainlint:"),
    "a directive ending a step's line inside a method chain": (
        "import pandas as pd\nout = (df\n    .loc[lambda d: d.a > 1]  # chainlint: keep never-matches\n"
        "    .loc[lambda d: d.b < 2])\n", "# chainlint:"),
    "a directive among the statements of a run": (
        "import pandas as pd\nout = df[df.a > 1]\nout = out[out.b < 2]  # chainlint: keep never-matches\n"
        "out = out[out.s == 'x']\n", "# chainlint:"),
}


@pytest.mark.parametrize("name", sorted(APART))
def test_what_the_rewriter_cannot_write_is_not_planned_as_one_mask(name: str) -> None:
    source, reason = APART[name]
    chain = _chain(source)
    assert _joinable(chain) == []
    assert any(reason in (step.apart or "") for step in chain.steps), [step.apart for step in chain.steps]
    # The rewriter refuses the group the planner once offered: the two must agree.
    with pytest.raises(RewriteError):
        _rewrite(source, [tuple(range(len(chain.steps)))])


WRITTEN = {
    "queries holding quotes of both kinds": (
        "import pandas as pd\nout = df.query('s == \"apple\"').query(\"s != 'cherry'\")\n",
        "import pandas as pd\nout = df.query('s == \"apple\" and s != \\'cherry\\'')\n"),
    "a query holding a backslash": (
        "import pandas as pd\nout = df.query('s != \"a\\\\\\\\b\"').query(\"s != 'cherry'\")\n",
        "import pandas as pd\nout = df.query('s != \"a\\\\\\\\b\" and s != \\'cherry\\'')\n"),
    "a query whose text is passed by keyword": (
        "import pandas as pd\nout = df.query(expr='a > 1').query('b < 2')\n",
        "import pandas as pd\nout = df.query(\"a > 1 and b < 2\")\n"),
    "queries passing the same options": (
        "import pandas as pd\nout = df.query('a > 1', engine='python').query('b < 2', engine='python')\n",
        "import pandas as pd\nout = df.query(\"a > 1 and b < 2\", engine='python')\n"),
    "a run of masks over one name in a class body stays masks": (
        "import pandas as pd\nclass C:\n    df = df[df.a > 1]\n    df = df[df.b < 2]\nout = C.df\n",
        "import pandas as pd\nclass C:\n    df = df[(df.a > 1) & (df.b < 2)]\nout = C.df\n"),
    "a directive on the line of a run's first statement stays with it": (
        "import pandas as pd\nout = df[df.a > 1]  # chainlint: profile=frame\nout = out[out.b < 2]\n",
        "import pandas as pd\nout = df[lambda d: (d.a > 1) & (d.b < 2)]  # chainlint: profile=frame\n"),
}


@pytest.mark.parametrize("name", sorted(WRITTEN))
def test_what_the_planner_joins_the_rewriter_writes(name: str) -> None:
    source, expected = WRITTEN[name]
    chain = _chain(source)
    assert (0, 1) in _joinable(chain) and not any(step.apart for step in chain.steps)
    new = _rewrite(source, [(0, 1)])
    assert new == expected
    # pandas is the judge: the same rows, order, columns, dtypes and index labels.
    pd.testing.assert_frame_equal(_run(new), _run(source))
