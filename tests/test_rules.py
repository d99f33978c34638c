"""Every rule directly: module text and an in-memory profile in, findings out (tests/rulekit.py)."""

from __future__ import annotations

import pytest
from rulekit import FOLDER, findings, profile_of, store_of

from chainlint.engine.check import apply_rules, plan_chains
from chainlint.engine.options import Options
from chainlint.engine.run import analyse_source
from chainlint.parse.source import text_source
from chainlint.rules import RULES
from chainlint.rules.joint_uncounted import RULE as JOINT_UNCOUNTED
from chainlint.rules.missing_profile import RULE as MISSING_PROFILE
from chainlint.rules.never_matches import RULE as NEVER_MATCHES
from chainlint.rules.reorder import RULE as REORDER
from chainlint.rules.stale_joint import RULE as STALE_JOINT
from chainlint.rules.unbound import RULE as UNBOUND
from chainlint.rules.unknown_column import RULE as UNKNOWN_COLUMN

#: 100 parcels: 95 held, 5 lost; weights 1.0 to 10.9 kg (9 above 10).
PARCELS_COLUMNS = {"status": ["lost"] * 5 + ["held"] * 95, "weight_kg": [1.0 + i / 10 for i in range(100)]}
PARCELS = profile_of(PARCELS_COLUMNS)
COSTLY = "d = d[d.status == 'held']\nd = d[d.weight_kg > 10]\n"
#: Large enough a frame for the saving to clear the default 5 ms.
ROWS = {"rows": 10_000_000}


def test_reorder() -> None:
    (found,) = findings(REORDER, COSTLY, PARCELS, **ROWS)
    assert found.order == (1, 0) and found.message.startswith("run `weight_kg > 10` first")
    assert findings(REORDER, "d = d[d.weight_kg > 10]\nd = d[d.status == 'held']\n", PARCELS, **ROWS) == []
    assert findings(REORDER, COSTLY, PARCELS, rows=1_000) == []  # saves less than 5 ms


def test_never_matches() -> None:
    (found,) = findings(NEVER_MATCHES, "d = d[d.weight_kg > 10]\nd = d[d.status == 'lsot']\n", PARCELS)
    assert found.literal == "lsot" and found.suggestions == ("lost",) and found.span.column == 6
    assert findings(NEVER_MATCHES, "d = d[d.weight_kg > 10]\nd = d[d.status == 'lost']\n", PARCELS) == []
    assert findings(NEVER_MATCHES, "d = d[d.status != 'lost']\nd = d[d.status.isin(['held', 'lost'])]\n", PARCELS) == []


def test_unknown_column() -> None:
    bound = "# chainlint: profile=t\nd = d[d.colour == 'red']\nd = d[d.weight_kg > 10]\n"
    (found,) = findings(UNKNOWN_COLUMN, bound, PARCELS)
    assert found.message == "profile `t` has no column `colour`" and found.span.line == 2 and found.span.end_column == 25
    assert findings(UNKNOWN_COLUMN, COSTLY, PARCELS) == []


def test_missing_profile() -> None:
    (found,) = findings(MISSING_PROFILE, "# chainlint: profile=other\n" + COSTLY, PARCELS)
    assert "names profile `other`" in found.message
    assert findings(MISSING_PROFILE, "# chainlint: profile=t\n" + COSTLY, PARCELS) == []
    assert findings(MISSING_PROFILE, "d = d[d.colour == 'red']\nd = d[d.a > 1]\n", PARCELS) == []  # unbound, but named nothing


def test_unbound() -> None:
    (found,) = findings(UNBOUND, "d = d[d.colour == 'red']\nd = d[d.weight_kg > 10]\n", PARCELS)
    assert "no profile holds all the columns it reads (colour, weight_kg)" in found.message
    assert findings(UNBOUND, COSTLY, PARCELS) == []


def _counted(*chains: str) -> dict:
    """The parcels' profile with joint counts of `status == 'held'` and `weight_kg > 5` made
    for the chains named (`path:frame`)."""
    entry = {"predicates": ["status == 'held'", "weight_kg > 5"], "subsets": [[0, 100], [1, 5], [2, 100], [3, 5]],
             "chains": list(chains)}
    return profile_of(PARCELS_COLUMNS, joint=[entry])



def test_stale_joint() -> None:
    # Counted for `m.py:d` with `weight_kg > 5`; the code now says `weight_kg > 10`.
    (found,) = findings(STALE_JOINT, COSTLY, _counted("m.py:d"))
    assert "counted these filters on `d` together, but the chain changed since" in found.message
    assert findings(STALE_JOINT, COSTLY, _counted("other.py:d")) == []  # counted for another chain
    assert findings(STALE_JOINT, COSTLY.replace("> 10", "> 5"), _counted("m.py:d")) == []  # covered
    assert findings(STALE_JOINT, COSTLY, PARCELS) == []  # no joint counts at all


def test_joint_uncounted() -> None:
    (found,) = findings(JOINT_UNCOUNTED, COSTLY, profile_of(PARCELS_COLUMNS, joint=[]))
    assert found.message.endswith("since it was not among the chains counted when profile `t` was made")
    (computed,) = findings(JOINT_UNCOUNTED, "# chainlint: profile=t\nd = d[d.weight_kg > 10]\nd = d[d.extra > 2]\n",
                           profile_of(PARCELS_COLUMNS, joint=[]))
    assert "reads `extra`, which the data of profile `t` does not have" in computed.message
    parsed_source = ("import pandas as pd\n# chainlint: profile=t\n"
                     "d = d[lambda d: pd.to_numeric(d.status, errors='coerce').notna()]\nd = d[d.weight_kg > 10]\n")
    (parsed,) = findings(JOINT_UNCOUNTED, parsed_source, profile_of(PARCELS_COLUMNS, joint=[]))
    assert "`status is numeric` cannot be counted on data: it parses values as pandas' `to_numeric` does" in parsed.message
    assert findings(JOINT_UNCOUNTED, COSTLY, _counted("m.py:d")) == []  # stale, not uncounted
    assert findings(JOINT_UNCOUNTED, COSTLY, PARCELS) == []


@pytest.mark.parametrize("rule", RULES, ids=lambda rule: rule.name)
def test_every_rule_is_declared(rule) -> None:
    assert rule.level in ("error", "warning", "note") and rule.summary and rule.description and rule.help
    assert (rule.level == "note") == (not rule.fails or not rule.default)


def test_a_never_matching_literal_holds_back_the_order_advice() -> None:
    """The engine plans a chain once its literal is fixed, unless the typo is kept on purpose."""
    typo = COSTLY + "d = d[d.status == 'lsot']\n"
    for source, wanted in [(typo, ["never-matches"]), ("# chainlint: keep never-matches\n" + typo, ["reorder"]),
                           ("# chainlint: keep reorder\n" + typo, ["never-matches"])]:
        given = Options(rows=10_000_000)
        chains = analyse_source(text_source(str(FOLDER / "m.py"), source)).chains
        shown, _ = apply_rules(plan_chains(chains, store_of(PARCELS), given), given)
        assert [f.rule for f in shown] == wanted, source
