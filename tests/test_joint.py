"""Joint statistics (`profile --for`): every stored joint count equals the row count pandas
gives for the same combination of filters (pandas as the reference), and the planner uses them."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute  # noqa: F401  (pa.compute)
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from chainlint.engine.run import analyse_source
from chainlint.cli import main
from chainlint.parse.source import text_source
from chainlint.profile import joint
from chainlint.profile.joint import JointCounter
from chainlint.profile.formats import table_batches

MASKS = [
    "d.a == 1", "d.a >= 2", "d.b < 3", "d.b != 4", "d.s == 'x'", "d.s.isin(['y', 'z'])", "d.f > 0.5",
    "d.f.isna()", "~(d.a == 0)", "(d.a > 2) | (d.s == 'w')", "d.s.str.startswith('x')", "d.f.between(0.1, 0.9)",
]


@st.composite
def correlated_frames(draw):
    rows = draw(st.integers(1, 400))
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    a = rng.integers(0, 5, rows)
    b = a + rng.integers(0, 2, rows)  # b follows a
    labels = np.array(["w", "x", "y", "z", "xx"], dtype=object)
    s = labels[np.where(rng.random(rows) < 0.8, a, rng.integers(0, 5, rows))]  # s mostly follows a
    s[rng.random(rows) < 0.1] = None
    f = rng.random(rows)
    f[rng.random(rows) < 0.15] = np.nan
    return pd.DataFrame({"a": a, "b": b, "s": pd.array(s, dtype="str"), "f": f})


@settings(max_examples=60, deadline=None)
@given(correlated_frames(), st.lists(st.sampled_from(MASKS), min_size=2, max_size=5, unique=True), st.booleans(), st.booleans())
def test_every_joint_count_equals_the_pandas_filter(frame, masks, dictionary, packed) -> None:
    source = "out = df" + "".join(f"[lambda d: {m}]" for m in masks) + "\n"
    (chain,) = analyse_source(text_source("m.py", source)).chains
    whole = pa.Table.from_pandas(frame, preserve_index=False)
    # Several chunks per column, as a CSV piece arrives; batches cut across them.
    table = pa.concat_tables([whole.slice(start, 40) for start in range(0, whole.num_rows, 40)])
    if dictionary:  # as Parquet string columns arrive
        table = table.set_column(2, "s", pa.compute.dictionary_encode(table.column("s")))
    counter = JointCounter([chain], set(frame.columns))
    # Both ways of counting: ANDs of packed masks, and one code per row (as for long chains).
    saved, joint.PACKED_STEPS = joint.PACKED_STEPS, (joint.MAX_STEPS if packed else 0)
    try:
        for batch in table_batches(table, 97):
            counter.add(batch)
    finally:
        joint.PACKED_STEPS = saved
    (entry,) = counter.finish(min_count=1)
    by_text = {step.predicate.canonical(): mask for step, mask in zip(chain.steps, masks)}
    for subset, count in entry["subsets"]:
        chosen = [by_text[text] for bit, text in enumerate(entry["predicates"]) if subset >> bit & 1]
        keep = pd.Series(True, index=frame.index)
        for text in chosen:
            keep &= eval(text, {}, {"d": frame}).astype(bool)  # the test's own filter text, on pandas
        assert count == int(keep.sum()), (chosen, count, int(keep.sum()))


PIPELINE = '''def correlated(frame):
    return frame.loc[lambda d: d.dest == "HNL"].loc[lambda d: d.carrier == "HA"].loc[lambda d: d.distance > 1000]
'''


def test_profile_for_source_and_planning_with_joint_counts(tmp_path: Path) -> None:
    from flights import flights

    frame = flights()
    frame.to_parquet(tmp_path / "flights.parquet")
    (tmp_path / "pipeline.py").write_text(PIPELINE)
    store = tmp_path / ".chainlint"
    result = CliRunner().invoke(main, ["profile", str(tmp_path / "flights.parquet"), "--name", "flights", "--store", str(store),
                                       "--for", str(tmp_path / "pipeline.py")])
    assert result.exit_code == 0 and "joint counts for 1 predicate sets" in result.output, result.output
    document = json.loads((store / "profiles" / "flights.json").read_text())
    (entry,) = document["joint"]
    subsets = dict(entry["subsets"])
    everything = (1 << len(entry["predicates"])) - 1
    truth = frame[(frame.dest == "HNL") & (frame.carrier == "HA") & (frame.distance > 1000)]  # pandas
    assert subsets[everything] == len(truth)
    explained = json.loads(CliRunner().invoke(main, ["explain", "--format", "json", str(tmp_path / "pipeline.py")]).output)
    (chain,) = explained["chains"]
    assert [s["basis"] for s in chain["steps"]] == ["joint (exact)"] * 3
    hnl = frame[frame.dest == "HNL"]
    assert abs(chain["steps"][1]["selectivity"] - (hnl.carrier == "HA").mean()) < 1e-6  # conditional share, exact
    # The code changes: the joint counts no longer cover the chain, and check says so.
    (tmp_path / "pipeline.py").write_text(PIPELINE.replace('"HA"', '"UA"'))
    stale = CliRunner().invoke(main, ["check", "--format", "json", str(tmp_path / "pipeline.py")])
    rules = [f["rule"] for f in json.loads(stale.output)["findings"]]
    assert "stale-joint" in rules


def test_rare_joint_groups_are_counted_with_their_nearest_group(tmp_path: Path) -> None:
    frame = pd.DataFrame({"a": [1, 1, 1, 2, 2, 2, 2, 2, 2, 3], "b": [0, 1, 1, 1, 1, 1, 1, 0, 0, 0]})
    source = "out = df[lambda d: d.a == 3][lambda d: d.b == 1]\n"
    (chain,) = analyse_source(text_source("m.py", source)).chains
    counter = JointCounter([chain], {"a", "b"})
    counter.add(pa.Table.from_pandas(frame, preserve_index=False))
    (entry,) = counter.finish(min_count=5)
    # Patterns (a == 3, b == 1): neither 3 rows, b only 6, a only 1. The 1 moves first (the
    # smallest) to the nearest non-empty pattern, neither (one flip; b only is two), then the
    # 4 there to b only (one flip).
    assert dict(entry["subsets"]) == {0: 10, 1: 0, 2: 10, 3: 0}


def test_unknown_column_is_reported(tmp_path: Path) -> None:
    (tmp_path / ".chainlint" / "profiles").mkdir(parents=True)
    demo = Path(__file__).parent.parent / "examples" / ".chainlint" / "profiles" / "parcel_scans.json"
    (tmp_path / ".chainlint" / "profiles" / "parcel_scans.json").write_bytes(demo.read_bytes())
    (tmp_path / "m.py").write_text("# chainlint: profile=parcel_scans\nout = scans[scans.depot == 'WEST'][scans.colour == 'red']\n")
    result = CliRunner().invoke(main, ["check", "--format", "json", str(tmp_path / "m.py")])
    findings = json.loads(result.output)["findings"]
    assert any(f["rule"] == "unknown-column" and "`colour`" in f["message"] for f in findings)


def test_profile_counts_the_chains_check_binds_to_it(tmp_path: Path) -> None:
    """`profile` picks the chains to count by the binding rules `check` binds by, in their order:
    the file a chain reads (rule 2) comes before `[tool.chainlint.bindings]` (rule 3). Its own
    copy of the rules once tried the configuration first, so this chain bound to the profile
    by `check` was never counted for it (`joint-uncounted` after every profile run)."""
    pd.DataFrame({"a": [i % 7 for i in range(300)], "b": [i % 3 for i in range(300)]}).to_parquet(tmp_path / "t.parquet")
    (tmp_path / "pyproject.toml").write_text('[tool.chainlint.bindings]\ndf = "other"\n')
    (tmp_path / "m.py").write_text('import pandas as pd\ndf = pd.read_parquet("t.parquet")\ndf = df[df.a > 1]\ndf = df[df.b == 2]\n')
    made = CliRunner().invoke(main, ["profile", str(tmp_path / "t.parquet"), "--name", "t", "--store", str(tmp_path / ".chainlint")])
    assert made.exit_code == 0, made.output
    explained = json.loads(CliRunner().invoke(main, ["explain", "--format", "json", str(tmp_path / "m.py")]).stdout)
    assert explained["chains"][0]["binding"] == {"profile": "t", "how": "source"}
    document = json.loads((tmp_path / ".chainlint" / "profiles" / "t.json").read_text())
    assert [entry["chains"] for entry in document["joint"]] == [["m.py:df"]]
    checked = CliRunner().invoke(main, ["check", "--format", "json", "--rule", "joint-uncounted", str(tmp_path / "m.py")])
    assert json.loads(checked.stdout)["findings"] == []
