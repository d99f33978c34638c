"""A long file gets the same findings and the same rewrite as its chains checked one file each.

The rewrite finds the chains of a whole file again in one pass (`chainlint/rewrite/plans.py`)
and verifies all its fixes together; splitting the file into one small file per chain must not
change a finding, a message or a byte of the fixed text. (How the time grows with the length is
`benchmarks/long_inputs.py`'s job: never a timed assertion here.)
"""

from __future__ import annotations

import json
import random
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from chainlint.cli import main

#: Chains of every kind the rewrite treats apart: neighbours fused into one mask, a statement
#: run, a run under new names, a barrier that stays, a mask written whole, a chain already in
#: a good order, a comment that moves with its step.
_PIECES = (
    '''
def heavy_{n}(scans):
    return (
        scans  # chainlint: profile=parcel_scans
        .loc[lambda d: d["weight_kg"] > 0.5]
        .loc[lambda d: d["depot"] == "WEST"]
        .loc[lambda d: d["status"] == "damaged"]
    )
''',
    '''
def cash_{n}():
    scans = pd.read_parquet(SCANS)  # chainlint: profile=parcel_scans
    review = scans[scans.service_level.isin(["standard", "economy", "express"])]
    review = review[review.vehicle_type != "bike"]
    # cash on delivery only
    review = review.dropna(subset=["cod_amount"])
    review = review.query("attempts >= 3")
    return review
''',
    '''
def renamed_{n}():
    scans = pd.read_parquet(SCANS)  # chainlint: profile=parcel_scans
    heavy = scans[scans.weight_kg > 0.5]
    west = heavy[heavy.depot == "WEST"]
    damaged = west[west.status == "damaged"]
    return damaged
''',
    '''
def above_average_{n}(scans):
    return (
        scans  # chainlint: profile=parcel_scans
        .query("recipient_type == 'business'")
        .loc[lambda d: d.declared_value > d.declared_value.mean()]
        .query("zone == 'Z07'")
        .query("attempts >= 3")
    )
''',
    '''
def whole_mask_{n}(scans):
    return scans[(scans.weight_kg > 0.5) & (scans.status == "damaged")]  # chainlint: profile=parcel_scans
''',
    '''
def good_{n}(scans):
    return scans[scans.status == "returned"].loc[lambda d: d.vehicle_type == "van"]  # chainlint: profile=parcel_scans
''',
)
_HEADER = 'import pandas as pd\n\nSCANS = "data/parcel_scans.parquet"\n'
_COPIES = 25


def _check(paths: list[str], *flags: str) -> str:
    result = CliRunner().invoke(main, ["check", *paths, "--jobs", "1", *flags])
    assert result.exit_code in (0, 1), result.output
    return result.output


def _findings(report: str) -> list[tuple[str, str, object, bool, object]]:
    return [(f["rule"], f["message"], f["groups"], f["fix"] is not None, f["fix_error"]) for f in json.loads(report)["findings"]]


@pytest.mark.usefixtures("project")
def test_a_long_file_is_checked_and_fixed_as_its_chains_one_file_each() -> None:
    pieces = [piece.format(n=n) for n in range(_COPIES) for piece in _PIECES]
    apart = Path("apart")
    apart.mkdir()
    names = []
    for number, piece in enumerate(pieces):
        names.append(str(apart / f"piece_{number:04d}.py"))
        Path(names[-1]).write_text(_HEADER + piece)
    Path("whole.py").write_text(_HEADER + "".join(pieces))

    whole = _findings(_check(["whole.py"], "--format", "json"))
    one_each = _findings(_check(names, "--format", "json"))
    assert whole == one_each
    # A fused plan, a run and a renamed run in each copy, every one fixed.
    assert sum(finding[3] for finding in whole) == 3 * _COPIES
    assert any(len(group) > 1 for finding in whole for group in finding[2])  # type: ignore[attr-defined]

    _check(["whole.py"], "--fix")
    _check(names, "--fix")
    fixed_apart = "".join(Path(name).read_text()[len(_HEADER):] for name in names)
    assert Path("whole.py").read_text() == _HEADER + fixed_apart
    assert fixed_apart != "".join(pieces)


def _fence_reference(lines: list[str]) -> dict[int, str | None]:
    """The fence of each filter of a one-run function (by line), by the rule the finder states:
    of the statements stepped over before a filter, the earliest binding a name that a filter
    before it reads, its first such name; else, the first later filter reading a name one of
    them binds fences it, with the earliest such statement's first such name. (The test's own
    statement of the rule, looking at every pair; the finder looks up only the names read.)"""
    filters = [(n, set(re.findall(r"\bv\d+\b", line))) for n, line in enumerate(lines, 1) if "scans[" in line]
    stepped: dict[int, list[set[str]]] = {}
    previous = filters[0][0]  # the run starts at its first filter
    for number, _ in filters:
        stepped[number] = [set(re.findall(r"\bv\d+\b", line.split("=")[0]))
                           for line in lines[previous:number - 1] if "scans" not in line and "def " not in line]
        previous = number
    fences: dict[int, str | None] = {}
    for place, (number, _) in enumerate(filters):
        read = set().union(*(names for _, names in filters[:place]))
        fence = next((min(names & read) for names in stepped[number] if names & read), None)
        for _, value in filters[place:] if fence is None else ():
            fence = next((min(names & value) for names in stepped[number] if names & value), None)
            if fence is not None:
                break
        fences[number] = fence
    return fences


@pytest.mark.usefixtures("project")
def test_a_long_run_fences_each_filter_after_an_assignment_of_a_name_a_filter_reads() -> None:
    # Many names, each filter reading few: a fence comes as often from a later filter as from
    # an earlier one, and several statements stepped over may bind names read.
    rng = random.Random(18)
    names = [f"v{n}" for n in range(120)]
    body = []
    for number in range(500):
        if rng.random() < 0.6:
            first, second = rng.sample(names, 2)
            body.append(f"    {first} = {number}\n" if rng.random() < 0.6 else f"    {first}, {second} = 1, {number}\n")
        else:
            read = " & ".join(f"(scans.weight_kg > {name})" for name in rng.sample(names, rng.randint(0, 2))) or "scans.weight_kg > 0.5"
            body.append(f"    scans = scans[{read}]\n")
    lines = ["def g(scans):  # chainlint: profile=parcel_scans\n", *(f"    {name} = 0\n" for name in names), *body, "    return scans\n"]
    Path("run.py").write_text("".join(lines))
    (chain,) = json.loads(CliRunner().invoke(main, ["explain", "run.py", "--jobs", "1", "--format", "json"]).output)["chains"]
    reasons: dict[int, str] = {}
    for step in chain["steps"]:  # a filter's fence stands on its first step
        reasons.setdefault(step["line"], step["reason"] or "")
    expected = _fence_reference(lines)
    assert sorted(reasons) == sorted(expected)
    for line, fence in expected.items():
        found = re.match(r"`(\w+)` is assigned between", reasons[line])
        assert (found and found[1]) == fence, (line, reasons[line])
    assert sum(fence is not None for fence in expected.values()) > 50


@pytest.mark.usefixtures("project")
def test_a_long_renamed_run_is_scanned_in_near_linear_work(monkeypatch: pytest.MonkeyPatch) -> None:
    """Counted, not timed: finding where a run of k statements stops looks up O(k) mentions (it
    looked up every frame's at every statement, O(k^2), for a run renaming its frame each time)."""
    import bisect
    import types

    from chainlint.find import runs

    lookups: list[int] = []

    def counted(name: str):  # type: ignore[no-untyped-def]
        def lookup(*args, **kwargs):  # type: ignore[no-untyped-def]
            lookups.append(1)
            return getattr(bisect, name)(*args, **kwargs)
        return lookup

    monkeypatch.setattr(runs, "bisect", types.SimpleNamespace(bisect_left=counted("bisect_left"), bisect_right=counted("bisect_right")))
    steps = 2000
    Path("run.py").write_text("def g(s0):  # chainlint: profile=parcel_scans\n"
                              + "".join(f"    s{n + 1} = s{n}[s{n}.weight_kg > {n / steps}]\n" for n in range(steps))
                              + f"    return s{steps}\n")
    result = CliRunner().invoke(main, ["explain", "run.py", "--jobs", "1", "--format", "json"])
    (chain,) = json.loads(result.output)["chains"]
    assert len(chain["steps"]) == steps
    assert len(lookups) <= 10 * steps
