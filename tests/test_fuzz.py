"""Fuzzing the commands: random bytes, random source text built from chain fragments, and random
JSON in each store document (profile, `config.json`, `cost-model.json`). Every run must end
with an exit status of 0, 1 or 2 and no traceback; a run that does not end within a generous
guard counts as a hang. Deterministic: the suite's hypothesis profile derandomizes."""

from __future__ import annotations

import contextlib
import json
import signal
import string
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from chainlint.cli import main

GUARD_SECONDS = 120  # not a speed goal: only what turns a hang into a failure


@contextlib.contextmanager
def _no_hang() -> Iterator[None]:
    def hung(signum: int, frame: Any) -> None:
        raise AssertionError(f"the command did not end within {GUARD_SECONDS} s")

    previous = signal.signal(signal.SIGALRM, hung)
    signal.alarm(GUARD_SECONDS)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)


def _run(*args: str) -> str:
    with _no_hang():
        result = CliRunner().invoke(main, list(args))
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        raise result.exception
    assert result.exit_code in (0, 1, 2), result.output
    assert "Traceback" not in result.output, result.output  # nor one caught and printed
    return result.output


@pytest.fixture(scope="module")
def project(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("fuzz")
    (folder / "pyproject.toml").write_text("")
    (folder / "t.csv").write_text("a,b,s\n" + "".join(f"{i % 9},{i % 4 / 2},{'pqr'[i % 3]}\n" for i in range(120)))
    _run("profile", str(folder / "t.csv"), "--name", "t", "--store", str(folder / ".chainlint"))
    return folder


FRAGMENTS = [
    "df", "d", "x", " = ", ".loc[", "lambda d: ", "d.a", "d['s']", "d.b", " > ", " == ", " < ", " & ", " | ", "~",
    "]", "[", "(", ")", "\n", "    ", ".query(", "'a > 1 and s == \"p\"'", ".dropna(subset=['a'])", ".isin([1, 2])",
    ".str.contains('p')", ".between(1, 3)", "1", "2.5", "'p'", "0x" + "f" * 40, "1e400", "None", "True", ",", ":",
    "# chainlint: profile=t\n", "# chainlint: keep\n", "df = df[df.a > 1]\n", "df = df[df.b == 2]\n", "def f(df):\n",
    "return ", "@x", "'\\udcff'", "\\\n", "\t", "#", "\"\"\"", "'\u2028'", "é", "\x00",
]

source_texts = st.one_of(
    st.lists(st.sampled_from(FRAGMENTS), max_size=60).map("".join),
    st.text(alphabet=string.printable + "éλ\u2028", max_size=400),
)

json_values = st.recursive(
    st.none() | st.booleans() | st.integers(min_value=-(2**70), max_value=2**70)
    | st.floats(allow_nan=False, allow_infinity=False) | st.text(max_size=12),
    lambda children: st.lists(children, max_size=4) | st.dictionaries(st.text(max_size=8), children, max_size=4),
    max_leaves=20,
)


def _paths(document: Any, prefix: tuple = ()) -> list[tuple]:
    found = [prefix]
    if isinstance(document, dict):
        for key, value in document.items():
            found += _paths(value, (*prefix, key))
    elif isinstance(document, list):
        for index, value in enumerate(document[:3]):
            found += _paths(value, (*prefix, index))
    return found


def _replace(document: Any, where: tuple, value: Any) -> Any:
    if not where:
        return value
    copy = json.loads(json.dumps(document))
    target = copy
    for key in where[:-1]:
        target = target[key]
    target[where[-1]] = value
    return copy


@settings(max_examples=60)
@given(data=st.binary(max_size=2000))
def test_random_bytes_as_source(project: Path, data: bytes) -> None:
    (project / "m.py").write_bytes(data)
    for command in ("check", "explain"):
        _run(command, str(project / "m.py"), "--jobs", "1")


@settings(max_examples=120)
@given(text=source_texts)
def test_random_source_text(project: Path, text: str) -> None:
    (project / "m.py").write_text(text, encoding="utf-8", errors="surrogateescape")
    _run("check", str(project / "m.py"), "--jobs", "1", "--format", "json")
    _run("check", str(project / "m.py"), "--jobs", "1", "--format", "sarif")
    _run("check", str(project / "m.py"), "--jobs", "1", "--diff")
    _run("explain", str(project / "m.py"), "--jobs", "1")


def _store_with(project: Path, name: str, text: str | bytes, tmp: Path) -> Path:
    store = tmp / "store"
    (store / "profiles").mkdir(parents=True, exist_ok=True)
    good = (project / ".chainlint" / "profiles" / "t.json").read_text()
    (store / "profiles" / "t.json").write_text(good)
    target = store / ("profiles/bad.json" if name == "profile" else name)
    if isinstance(text, bytes):
        target.write_bytes(text)
    else:
        target.write_text(text, encoding="utf-8", errors="surrogateescape")
    return store


def _use_store(project: Path, store: Path) -> None:
    (project / "m.py").write_text("# chainlint: profile=bad\nx = d.loc[lambda d: d.a > 1].loc[lambda d: d.s == 'p']\n"
                                  "y = d.loc[lambda d: d.a > 2].loc[lambda d: d.b == 0.5]\n")
    _run("check", str(project / "m.py"), "--store", str(store), "--jobs", "1")
    _run("profiles", "--store", str(store))
    _run("profiles", "--store", str(store), "show", "bad")
    _run("profiles", "--store", str(store), "check")
    _run("profiles", "--store", str(store), "merge", "both", "t", "bad")


@settings(max_examples=80)
@given(data=st.data())
def test_random_json_in_a_profile(project: Path, tmp_path_factory: pytest.TempPathFactory, data: st.DataObject) -> None:
    good = json.loads((project / ".chainlint" / "profiles" / "t.json").read_text())
    good["name"] = "bad"
    where = data.draw(st.sampled_from(_paths(good)))
    document = _replace(good, where, data.draw(json_values))
    _use_store(project, _store_with(project, "profile", json.dumps(document), tmp_path_factory.mktemp("s")))


@settings(max_examples=40)
@given(name=st.sampled_from(["profile", "config.json", "cost-model.json"]),
       content=st.one_of(st.binary(max_size=300), json_values.map(json.dumps),
                         json_values.map(lambda value: json.dumps({"redaction_key": value}))))
def test_random_store_documents(project: Path, tmp_path_factory: pytest.TempPathFactory, name: str,
                                content: str | bytes) -> None:
    _use_store(project, _store_with(project, name, content, tmp_path_factory.mktemp("s")))


@settings(max_examples=40)
@given(model=st.dictionaries(st.sampled_from(["compare", "member", "between", "fixed", "numeric_take_kept", "other"]),
                             json_values, max_size=3))
def test_random_cost_models(project: Path, tmp_path_factory: pytest.TempPathFactory, model: dict) -> None:
    text = json.dumps({"format": "chainlint-cost-model", "format_version": 1, "model": model})
    _use_store(project, _store_with(project, "cost-model.json", text, tmp_path_factory.mktemp("s")))


@settings(max_examples=30)
@given(data=st.binary(max_size=600))
def test_random_bytes_as_data(tmp_path_factory: pytest.TempPathFactory, data: bytes) -> None:
    folder = tmp_path_factory.mktemp("data")
    for suffix in (".csv", ".parquet", ".arrow", ".jsonl"):
        (folder / f"d{suffix}").write_bytes(data)
        _run("profile", str(folder / f"d{suffix}"), "--name", "d", "--store", str(folder / "store"))
