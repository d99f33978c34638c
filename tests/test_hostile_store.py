"""Hostile store documents (profiles, `config.json`, `cost-model.json`): every malformed field is
one error naming the file and the field, the run goes on with the other profiles, and nothing
hangs or exhausts memory. The format is docs/profile-format.md."""

from __future__ import annotations

import copy
import json
import os
import re
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner

from chainlint.cli import main

CHAIN = "# chainlint: profile=good\nout = d.loc[lambda d: d.a > 1].loc[lambda d: d.b == 'x']\n"


def _run(*args: str) -> tuple[int, str]:
    result = CliRunner().invoke(main, list(args))
    assert result.exception is None or isinstance(result.exception, SystemExit), repr(result.exception)
    return result.exit_code, result.output


@pytest.fixture(scope="module")
def good(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    folder = tmp_path_factory.mktemp("good")
    (folder / "t.csv").write_text("a,b,when\n" + "".join(f"{i % 7},{'xyz'[i % 3]},2024-01-{1 + i % 28:02d}\n" for i in range(200)))
    code, output = _run("profile", str(folder / "t.csv"), "--name", "good", "--store", str(folder / "store"))
    assert code == 0, output
    return json.loads((folder / "store" / "profiles" / "good.json").read_text())


@pytest.fixture()
def store(tmp_path: Path, good: dict[str, Any]) -> Path:
    (tmp_path / "profiles").mkdir()
    (tmp_path / "profiles" / "good.json").write_text(json.dumps(good))
    (tmp_path / "m.py").write_text(CHAIN)
    return tmp_path


def _set(document: Any, path: tuple, value: Any) -> Any:
    changed = copy.deepcopy(document)
    target = changed
    for key in path[:-1]:
        target = target[key]
    if value is _DELETE:
        del target[path[-1]]
    else:
        target[path[-1]] = value
    return changed


_DELETE = object()
_A = ("columns", "a")
# (where, new value, the field the message must name)
MUTATIONS = [
    (("rows",), "200", "field rows: must be an integer, not a string"),
    (("rows",), -1, "field rows: must be at least 0"),
    (("rows",), True, "field rows: must be an integer"),
    (("name",), "../x", "field name:"),
    (("columns",), [], "field columns: must be an object"),
    (("source",), _DELETE, "field source: is missing"),
    (("source", "files"), {}, "field source.files: must be a list"),
    (("source", "files", 0, "path"), "a\x00b", "field source.files[0].path"),
    (("settings", "min_count"), 0, "field settings.min_count: must be at least 1"),
    (("created",), 5, "field created: must be a string"),
    ((*_A, "rows"), 1.5, "field columns.a.rows: must be an integer"),
    ((*_A, "nulls"), 10**9, "field columns.a.nulls: 1000000000 is more than"),
    ((*_A, "type"), _DELETE, "field columns.a.type: is missing"),
    ((*_A, "top"), [], "field columns.a.top: must be an object"),
    ((*_A, "top", "values"), [[1]], "field columns.a.top.values[0]: must be a [value, count] pair"),
    ((*_A, "top", "values"), [[1, "5"]], "field columns.a.top.values[0][1]: must be an integer"),
    ((*_A, "top", "values"), [[[1, [2]], 5]], "field columns.a.top.values[0][0]: must be a single value"),
    ((*_A, "distinct"), {"value": "many", "exact": True}, "field columns.a.distinct.value: must be a number"),
    ((*_A, "distinct"), {"value": 3, "exact": False}, "field columns.a.distinct.standard_error: is missing"),
    ((*_A, "histogram", "bounds"), {"0": 1}, "field columns.a.histogram.bounds: must be a list"),
    ((*_A, "histogram", "bounds"), [1, None], "field columns.a.histogram.bounds[1]"),
    ((*_A, "max"), _DELETE, "field columns.a.max: is missing"),
    ((*_A, "clustering"), "high", "field columns.a.clustering: must be a number"),
    ((*_A, "suppressed"), {"values": -1, "rows": 0}, "field columns.a.suppressed.values: must be at least 0"),
    ((*_A, "sketch"), 7, "field columns.a.sketch: must be a string"),
    (("joint",), [{"predicates": ["a > 1"], "subsets": [[0, "many"]]}], "field joint[0].subsets[0][1]"),
    (("joint",), {"predicates": []}, "field joint: must be a list"),
    (("joint",), [{"predicates": ["a > 1"], "subsets": [[0, 5]], "chains": 7}], "field joint[0].chains: must be a list"),
]


def _check_names(store: Path, wanted: str) -> None:
    """Every command that reads the profile names the field; `check` still uses the good one."""
    code, output = _run("check", str(store / "m.py"), "--store", str(store))
    assert code == 2 and wanted in output, output
    code, output = _run("explain", str(store / "m.py"), "--store", str(store), "--format", "json")
    assert code == 2
    report = json.loads(output)
    assert report["chains"][0]["binding"]["profile"] == "good"  # the run went on with the good profile
    assert any(wanted in e["message"] for e in report["errors"])
    code, output = _run("profiles", "--store", str(store))
    assert code == 2 and wanted in output and output.count("good") >= 1
    for command in (["show", "bad"], ["check", "bad"], ["merge", "both", "good", "bad"]):
        code, output = _run("profiles", "--store", str(store), *command)
        assert code == 2 and wanted in output, (command, output)


@pytest.mark.parametrize(("where", "value", "wanted"), MUTATIONS, ids=[m[2][:40] for m in MUTATIONS])
def test_malformed_profile_field_is_named_and_the_run_goes_on(store: Path, good: dict[str, Any], where: tuple,
                                                               value: Any, wanted: str) -> None:
    bad = _set(_set(good, ("name",), "bad"), where, value)
    (store / "profiles" / "bad.json").write_text(json.dumps(bad))
    _check_names(store, wanted)


@pytest.mark.parametrize(("text", "wanted"), [
    ('{"rows": NaN}', "NaN is not a number JSON allows"),
    ('{"rows": -Infinity}', "-Infinity is not a number JSON allows"),
    ('{"rows": 1e999}', "does not fit a finite number"),
    ('{"rows": ' + "9" * 5000 + "}", "an integer of 5000 digits"),
    ("[" * 100_000 + "]" * 100_000, "nested"),
    ('{"a": ' + "[" * 40 + "]" * 40 + "}", "nested deeper than 16 levels"),
    ("\xff", "not UTF-8"),
    ("", "not valid JSON"),
    ("[1, 2]", "not a chainlint profile"),
])
def test_unreadable_profile_text_is_refused_before_use(store: Path, text: str, wanted: str) -> None:
    (store / "profiles" / "bad.json").write_bytes(text.encode("utf-8", "surrogateescape") if text != "\xff" else b"\xff")
    _check_names(store, wanted)


@pytest.mark.skipif(not hasattr(os, "mkfifo") or not os.path.exists("/dev/zero"), reason="POSIX special files")
def test_fifo_device_and_huge_file_as_profile_neither_hang_nor_fill_memory(store: Path) -> None:
    os.mkfifo(store / "profiles" / "fifo.json")
    os.symlink("/dev/zero", store / "profiles" / "zero.json")
    with open(store / "profiles" / "huge.json", "wb") as handle:  # sparse: no disk used
        handle.truncate(65 * 1024 * 1024)
    run = subprocess.run([sys.executable, "-m", "chainlint", "check", "m.py", "--store", "."], cwd=store,
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 2 and "Traceback" not in run.stderr
    errors = run.stdout + run.stderr
    # GNU `file:line:column: message`, the path said once.
    assert "fifo.json:1:1: error: not a regular file" in errors and "zero.json:1:1: error: not a regular file" in errors
    assert "huge.json:1:1: error: 68,157,440 bytes, over the 67,108,864-byte limit" in errors
    assert all(line.count(".json") == 1 for line in errors.splitlines() if ": error: " in line), errors


@pytest.mark.parametrize(("text", "wanted"), [
    ('{"redaction_key": 5}', "field redaction_key: must be a string"),
    ('{"redaction_key": "abc"}', "field redaction_key: 'abc' is not of the form"),
    ("[]", "must be an object"),
    ('{"a": NaN}', "NaN is not a number JSON allows"),
    ('{"a": ' * 50_000, "nested"),
])
def test_malformed_store_configuration(store: Path, text: str, wanted: str) -> None:
    (store / "config.json").write_text(text)
    code, output = _run("check", str(store / "m.py"), "--store", str(store))
    assert code == 2 and wanted in output
    (line,) = [line for line in output.splitlines() if "cannot read the store configuration" in line]
    assert re.match(r".*/config\.json:\d+:\d+: error: cannot read the store configuration", line) and line.count("config.json") == 1
    code, output = _run("profile", str(store / "m.py"), "--name", "x", "--store", str(store), "--redact", "a")
    assert code == 2 and wanted in output
    assert json.loads(json.dumps(text)) == (store / "config.json").read_text()  # never replaced


@pytest.mark.parametrize(("model", "wanted"), [
    ({"between": "fast"}, "field model.between: must be a number"),
    ({"between": -1}, "field model.between: must lie in"),
    ({"compare": {"numeric": 1}}, "field model.compare.str: is missing"),
    ({"compare": [1, 2]}, "field model.compare: must be an object"),
    ({"numeric_take_kept": []}, "field model.numeric_take_kept: must hold at least one"),
    ({"numeric_take_kept": [[2, 1]]}, "field model.numeric_take_kept[0][0]: must lie in [0, 1]"),
    ({"numeric_take_kept": [[0.5, "x"]]}, "field model.numeric_take_kept[0][1]: must be a number"),
    ({"bogus": 1}, "unknown cost model fields: bogus"),
])
def test_malformed_cost_model_is_named_and_the_built_in_one_used(store: Path, model: dict, wanted: str) -> None:
    (store / "cost-model.json").write_text(json.dumps({"format": "chainlint-cost-model", "model": model}))
    code, output = _run("explain", str(store / "m.py"), "--store", str(store), "--format", "json")
    assert code == 2
    report = json.loads(output)
    assert report["chains"][0]["binding"]["profile"] == "good"
    (error,) = report["errors"]
    assert error["path"] == str(store / "cost-model.json") and wanted in error["message"], error


@pytest.mark.parametrize("document", ["config.json", "cost-model.json"])
@pytest.mark.parametrize(("text", "wanted"), [
    ('{"a": NaN}', "NaN is not a number JSON allows"),
    ('{"a": ' + "9" * 5000 + "}", "an integer of 5000 digits"),
    ("[" * 100_000 + "]" * 100_000, "nested"),
    ("\xff", "not UTF-8"),
])
def test_unreadable_store_document_text_is_refused_before_use(store: Path, document: str, text: str, wanted: str) -> None:
    """The profile's text-level cases, for the store's two other documents: one error naming the
    file, and the run goes on with the profiles."""
    (store / document).write_bytes(text.encode("utf-8") if text != "\xff" else b"\xff")
    code, output = _run("explain", str(store / "m.py"), "--store", str(store), "--format", "json")
    assert code == 2
    report = json.loads(output)
    assert report["chains"][0]["binding"]["profile"] == "good"
    (error,) = report["errors"]
    assert error["path"] == str(store / document) and wanted in error["message"], error


@pytest.mark.skipif(not hasattr(os, "mkfifo") or not os.path.exists("/dev/zero"), reason="POSIX special files")
def test_fifo_and_device_as_store_documents_neither_hang_nor_fill_memory(store: Path) -> None:
    for fifo, device in (("config.json", "cost-model.json"), ("cost-model.json", "config.json")):
        os.mkfifo(store / fifo)
        os.symlink("/dev/zero", store / device)
        run = subprocess.run([sys.executable, "-m", "chainlint", "explain", "m.py", "--store", ".", "--format", "json"],
                             cwd=store, capture_output=True, text=True, timeout=120)
        assert run.returncode == 2 and "Traceback" not in run.stderr
        report = json.loads(run.stdout)
        assert report["chains"][0]["binding"]["profile"] == "good"
        assert {(e["path"], e["message"].endswith("not a regular file")) for e in report["errors"]} == {
            (str(store / fifo), True), (str(store / device), True)}
        (store / fifo).unlink()
        (store / device).unlink()
