"""`chainlint profile` on bad input, the store, determinism, privacy and the format."""

from __future__ import annotations

import gzip
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from click.testing import CliRunner

from chainlint.cli import main
from chainlint.config import find_config
from chainlint.profile import csv_reader
from chainlint.profile.columns import ColumnProfiler
from chainlint.profile.entries import column_entry
from chainlint.profile.settings import Settings
from chainlint.redaction import redact_value
from chainlint.profile.store import find_store, load_document, redaction_key


def _run(*args: str):
    return CliRunner().invoke(main, list(args))


def _profile(tmp_path: Path, data: Path, *options: str, name: str = "p"):
    return _run("profile", str(data), "--name", name, "--store", str(tmp_path / "store"), *options)


def _error_line(result) -> str:
    assert result.exit_code == 2, result.output
    lines = [line for line in result.output.splitlines() if line.startswith("chainlint: error:")]
    assert len(lines) == 1, result.output
    return lines[0]


def test_missing_file(tmp_path: Path) -> None:
    assert "no such file" in _error_line(_profile(tmp_path, tmp_path / "nope.csv"))


def test_empty_and_header_only(tmp_path: Path) -> None:
    empty = tmp_path / "empty.csv"
    empty.write_text("")
    assert f"{empty}: empty file" in _error_line(_profile(tmp_path, empty))
    header = tmp_path / "header.csv"
    header.write_text("a,b\n")
    assert "no data rows" in _error_line(_profile(tmp_path, header))


def test_malformed_csv_row_names_file_and_line(tmp_path: Path) -> None:
    path = tmp_path / "bad.csv"
    path.write_text("a,b\n1,2\n3,4\n5,6,7\n8,9\n")
    line = _error_line(_profile(tmp_path, path))
    assert f"{path}:4: malformed CSV row (expected 2 fields, found 3)" in line


def test_data_errors_carry_their_place_as_fields(tmp_path: Path) -> None:
    from chainlint.profile.errors import DataError
    from chainlint.profile.readers import open_dataset

    bad = tmp_path / "bad.csv"
    bad.write_text("a,b\n1,2\n3,4\n5,6,7\n8,9\n")
    with pytest.raises(DataError) as raised:
        for _ in open_dataset([str(bad)]).batches:
            pass
    assert (raised.value.path, raised.value.line, raised.value.reason) == (str(bad), 4, "malformed CSV row (expected 2 fields, found 3)")
    (tmp_path / "x.xlsx").write_bytes(b"PK")
    with pytest.raises(DataError) as raised:
        open_dataset([str(tmp_path / "x.xlsx")])
    assert raised.value.path == str(tmp_path / "x.xlsx") and raised.value.reason.startswith("unknown data format")


def _pieced_csv(path: Path, replace: tuple[int, str], compressed: bool) -> Path:
    """A 60-line CSV (header `a,b`, integer rows) with one line replaced, plain or gzipped."""
    lines = ["a,b"] + [f"{i},{i * 2}" for i in range(1, 60)]
    lines[replace[0] - 1] = replace[1]
    text = "\n".join(lines) + "\n"
    path = path.with_name(path.name + (".gz" if compressed else ""))
    if compressed:
        path.write_bytes(gzip.compress(text.encode()))
    else:
        path.write_text(text)
    return path


@pytest.mark.parametrize("compressed", [False, True])
def test_malformed_row_in_a_later_piece_names_its_line(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, compressed: bool) -> None:
    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 64)  # the file is parsed in many pieces
    path = _pieced_csv(tmp_path / "bad.csv", (48, "9,9,9"), compressed)
    assert f"{path}:48: malformed CSV row (expected 2 fields, found 3)" in _error_line(_profile(tmp_path, path))


@pytest.mark.parametrize("compressed", [False, True])
def test_value_of_another_type_in_a_later_piece_names_its_line(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, compressed: bool) -> None:
    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 64)  # the first piece decides that `a` holds integers
    path = _pieced_csv(tmp_path / "mixed.csv", (52, "many,3"), compressed)
    line = _error_line(_profile(tmp_path, path))
    assert f"{path}:52: " in line and "invalid value 'many'" in line and "first part decided" in line


def test_tab_separated_values(tmp_path: Path) -> None:
    path = tmp_path / "t.tsv"
    path.write_text("a\tb c\n" + "".join(f"{i % 3}\tx,{i % 2}\n" for i in range(12)))
    assert _profile(tmp_path, path).exit_code == 0
    columns = load_document(tmp_path / "store" / "profiles" / "p.json")["columns"]
    assert sorted(columns) == ["a", "b c"]
    assert columns["b c"]["top"]["values"] == [["x,0", 6], ["x,1", 6]]


def test_line_longer_than_a_piece(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 64)
    path = tmp_path / "long.csv"
    path.write_text("a,b\n" + "".join(f"{'x' * (500 if i == 7 else 3)},{i}\n" for i in range(30)))
    result = _profile(tmp_path, path, "--min-count", "1")  # the one long value is counted
    assert result.exit_code == 0, result.output
    columns = load_document(tmp_path / "store" / "profiles" / "p.json")["columns"]
    assert columns["b"]["rows"] == 30 and columns["b"]["distinct"]["value"] == 30
    assert columns["a"]["distinct"]["value"] == 2


def test_profiling_never_imports_pandas(tmp_path: Path) -> None:
    # pandas costs 0.2 s to import; the profiler reads and counts with pyarrow and numpy only.
    data = tmp_path / "d.csv"
    # Exact and estimated columns (cap 50) of each kind: strings, integers, dates.
    data.write_text("name,key,n,when\n" + "".join(f"v{i % 7},k{i},{i},2024-01-{i % 28 + 1:02d}\n" for i in range(300)))
    code = (
        "import sys\nfrom chainlint.cli import main\n"
        "try:\n    main(sys.argv[1:])\nexcept SystemExit:\n    pass\n"
        "print('pandas' in sys.modules)"
    )
    done = subprocess.run(
        [sys.executable, "-c", code, "profile", str(data), "--name", "p", "--store", str(tmp_path / "store"), "--distinct-cap", "50"],
        capture_output=True, text=True, check=True,
    )
    assert "-> " in done.stdout and done.stdout.strip().splitlines()[-1] == "False", done.stdout + done.stderr


def test_non_utf8_csv(tmp_path: Path) -> None:
    path = tmp_path / "latin.csv"
    path.write_bytes(b"name,n\ncaf\xe9,1\n")
    assert "UTF-8" in _error_line(_profile(tmp_path, path))


def test_unknown_format_and_unreadable_parquet(tmp_path: Path) -> None:
    (tmp_path / "x.xlsx").write_text("?")
    assert "unknown data format" in _error_line(_profile(tmp_path, tmp_path / "x.xlsx"))
    (tmp_path / "x.parquet").write_text("not parquet")
    assert "not a readable Parquet file" in _error_line(_profile(tmp_path, tmp_path / "x.parquet"))


def test_several_csv_files_are_one_dataset_if_their_columns_agree(tmp_path: Path) -> None:
    first, second, other = tmp_path / "1.csv", tmp_path / "2.csv", tmp_path / "3.csv"
    first.write_text("a,b\n" + "1,x\n" * 6)
    second.write_text("a,b\n" + "2,y\n" * 5)
    other.write_text("a,c\n1,x\n")
    assert _profile(tmp_path, first, str(second)).exit_code == 0
    document = load_document(tmp_path / "store" / "profiles" / "p.json")
    assert document["rows"] == 11 and document["columns"]["a"]["top"]["values"] == [[1, 6], [2, 5]]
    before = (tmp_path / "store" / "profiles" / "p.json").read_bytes()
    line = _error_line(_profile(tmp_path, first, str(other)))
    assert f"{other}: its columns differ from {first}'s" in line
    assert (tmp_path / "store" / "profiles" / "p.json").read_bytes() == before


def test_duplicate_column_names_are_made_unique_as_pandas_does(tmp_path: Path) -> None:
    path = tmp_path / "dup.csv"
    path.write_text("a,a,,a.1,a\n1,2,3,4,5\n")
    assert _profile(tmp_path, path).exit_code == 0
    document = json.loads((tmp_path / "store" / "profiles" / "p.json").read_text())
    # pandas.read_csv is the ground truth of the names.
    assert document["column_order"] == list(pd.read_csv(path).columns) == ["a", "a.2", "Unnamed: 2", "a.1", "a.3"]


def test_awkward_columns_profile_fine(tmp_path: Path) -> None:
    path = tmp_path / "odd.csv"
    rows = ["mixed,all_null,two words,größe,long"]
    rows += [f"{i if i % 2 else 'x' + str(i)},,{i % 3},{i % 7},{'z' * 100_000 if i == 3 else 'a'}" for i in range(50)]
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    result = _profile(tmp_path, path)
    assert result.exit_code == 0, result.output
    columns = load_document(tmp_path / "store" / "profiles" / "p.json")["columns"]
    assert columns["mixed"]["type"] == "str"
    assert columns["all_null"]["nulls"] == 50
    assert columns["two words"]["distinct"]["value"] == 3
    assert columns["größe"]["distinct"]["value"] == 7
    assert all(len(str(v)) < 100 for v, _ in columns["long"]["top"]["values"])


def test_failed_run_leaves_existing_profile_intact(tmp_path: Path) -> None:
    good = tmp_path / "good.csv"
    good.write_text("a\n" + "1\n" * 10)
    assert _profile(tmp_path, good).exit_code == 0
    target = tmp_path / "store" / "profiles" / "p.json"
    before = target.read_bytes()
    bad = tmp_path / "bad.csv"
    bad.write_text("a\n1\n2,3\n")
    _error_line(_profile(tmp_path, bad))
    assert target.read_bytes() == before
    assert sorted(p.name for p in target.parent.iterdir()) == ["p.json"]


def test_unwritable_store(tmp_path: Path) -> None:
    data = tmp_path / "d.csv"
    data.write_text("a\n1\n")
    blocker = tmp_path / "file"
    blocker.write_text("")
    result = _run("profile", str(data), "--name", "p", "--store", str(blocker / "store"))
    assert "cannot write" in _error_line(result)


def test_corrupt_and_future_profiles_are_refused(tmp_path: Path) -> None:
    profiles = tmp_path / "store" / "profiles"
    profiles.mkdir(parents=True)
    (profiles / "broken.json").write_text("{not json")
    (profiles / "future.json").write_text(json.dumps({"format": "chainlint-profile", "format_version": 99}))
    (profiles / "pickle.json").write_bytes(b"\x80\x04\x95")
    store = str(tmp_path / "store")
    assert "broken.json:1:2: not valid JSON" in _error_line(_run("profiles", "--store", store, "show", "broken"))
    assert "newer than this chainlint understands" in _error_line(_run("profiles", "--store", store, "show", "future"))
    assert "pickle.json" in _error_line(_run("profiles", "--store", store, "show", "pickle"))


def test_reprofiling_unchanged_data_is_byte_identical(tmp_path: Path) -> None:
    data = tmp_path / "d.parquet"
    pd.DataFrame({"a": [1, 2, 2, 3] * 50, "s": ["x", "y", "y", "z"] * 50, "f": [0.5, 1.5, 2.5, None] * 50}).to_parquet(data)
    first = _profile(tmp_path, data)
    assert first.exit_code == 0 and "(written)" in first.output
    path = tmp_path / "store" / "profiles" / "p.json"
    before = path.read_bytes()
    second = _profile(tmp_path, data)
    assert "(unchanged)" in second.output
    assert path.read_bytes() == before
    # Another store holding the same sketch key writes the same profile.
    other_store = tmp_path / "other"
    (other_store / "private").mkdir(parents=True)
    (other_store / "private" / "sketch-key").write_bytes((tmp_path / "store" / "private" / "sketch-key").read_bytes())
    assert _run("profile", str(data), "--name", "p", "--store", str(other_store)).exit_code == 0
    strip = lambda raw: {k: v for k, v in json.loads(raw).items() if k != "created"}  # noqa: E731
    assert strip((other_store / "profiles" / "p.json").read_bytes()) == strip(before)


def test_redacted_column_is_stored_as_keyed_hashes(tmp_path: Path) -> None:
    data = tmp_path / "d.csv"
    data.write_text("account,n\n" + "".join(f"ACC-{i % 3},{i}\n" for i in range(60)))
    assert _profile(tmp_path, data, "--redact", "account").exit_code == 0
    text = (tmp_path / "store" / "profiles" / "p.json").read_text()
    assert "ACC-" not in text
    key = redaction_key(tmp_path / "store", create=False)
    assert len(key) == 32 and key.hex() not in text
    listed = dict(load_document(tmp_path / "store" / "profiles" / "p.json")["columns"]["account"]["top"]["values"])
    assert listed[redact_value(key, "ACC-1")] == 20


def test_unknown_redact_column(tmp_path: Path) -> None:
    data = tmp_path / "d.csv"
    data.write_text("a\n1\n")
    assert "--redact names no column" in _error_line(_profile(tmp_path, data, "--redact", "b"))


def test_gzip_csv_and_listing(tmp_path: Path) -> None:
    data = tmp_path / "d.csv.gz"
    with gzip.open(data, "wt") as handle:
        handle.write("a,b\n" + "1,x\n" * 20)
    assert _profile(tmp_path, data, name="zipped").exit_code == 0
    listing = _run("profiles", "--store", str(tmp_path / "store"))
    assert listing.exit_code == 0 and listing.output.startswith("zipped ")
    shown = _run("profiles", "--store", str(tmp_path / "store"), "show", "zipped")
    assert "b  (str)  nulls 0 (0.0%)  distinct 1" in shown.output and "'x' 100.0%" in shown.output
    after = _run("profiles", "show", "zipped", "--store", str(tmp_path / "store"))   # options after the subcommand
    assert after.exit_code == 0 and after.output == shown.output
    checked = _run("profiles", "check", "--store", str(tmp_path / "store"))
    assert checked.output.startswith("zipped: ")


def test_an_estimated_distinct_count_is_never_shown_above_the_values(tmp_path: Path) -> None:
    data = tmp_path / "unique.parquet"
    pd.DataFrame({"k": np.arange(200_000, dtype="int64")}).to_parquet(data)   # its sketch estimates 201,898
    assert _profile(tmp_path, data, "--distinct-cap", "100", name="u").exit_code == 0
    document = load_document(tmp_path / "store" / "profiles" / "u.json")
    shown = _run("profiles", "show", "u", "--store", str(tmp_path / "store")).output
    distinct = int(shown.split("distinct ")[1].split()[0].replace(",", ""))
    assert distinct == 200_000
    assert document["columns"]["k"]["distinct"]["exact"] is False


def test_store_is_found_beside_the_project(tmp_path: Path) -> None:
    (tmp_path / "pyproject.toml").write_text("[project]\nname = 'x'\n")
    (tmp_path / "src" / "pkg").mkdir(parents=True)
    assert find_store(tmp_path / "src" / "pkg") == (tmp_path / ".chainlint").resolve()
    (tmp_path / "src" / ".chainlint").mkdir()
    assert find_store(tmp_path / "src" / "pkg") == (tmp_path / "src" / ".chainlint").resolve()


def test_a_store_above_the_project_root_is_not_the_projects(tmp_path: Path) -> None:
    # The climb stops at the first folder holding a project marker: a stray store further up
    # (in a parent of many projects) is never found for them.
    (tmp_path / ".chainlint").mkdir()
    for marker in ("pyproject.toml", "chainlint.toml", ".git"):
        project = tmp_path / marker.replace(".", "_")
        (project / "src").mkdir(parents=True)
        (project / marker).write_text("")
        assert find_store(project / "src") == project / ".chainlint"
    (tmp_path / "chainlint.toml").write_text("min_gain = 9\n")   # likewise a configuration
    assert find_config(tmp_path / "pyproject_toml" / "src") is None
    assert find_store(tmp_path / "elsewhere" / "src") == tmp_path / ".chainlint"


def test_the_search_never_enters_a_folder_every_user_may_write(tmp_path: Path) -> None:
    shared = tmp_path / "shared"   # as /tmp is: anyone may create a store or a configuration there
    (shared / ".chainlint").mkdir(parents=True)
    (shared / "chainlint.toml").write_text("min_gain = 9\n")
    shared.chmod(0o1777)
    (shared / "x" / "src").mkdir(parents=True)
    assert find_store(shared / "x" / "src") == shared / "x" / "src" / ".chainlint"
    assert find_config(shared / "x" / "src") is None
    assert find_store(shared) == shared / ".chainlint"     # named as the start, it is the user's choice
    assert find_config(shared) is not None


@pytest.mark.parametrize("name", ["../escape", "", "a/b", ".hidden"])
def test_bad_profile_names(tmp_path: Path, name: str) -> None:
    data = tmp_path / "d.csv"
    data.write_text("a\n1\n")
    assert "profile name" in _error_line(_profile(tmp_path, data, name=name))


def test_profiles_check_tells_when_the_data_changed(tmp_path: Path) -> None:
    data = tmp_path / "d.csv"
    data.write_text("a\n" + "1\n" * 10)
    assert _profile(tmp_path, data).exit_code == 0
    store = str(tmp_path / "store")
    current = _run("profiles", "--store", store, "check")
    assert current.exit_code == 0 and "p: up to date" in current.output
    data.write_text("a\n" + "2\n" * 10)  # same size, other content
    changed = _run("profiles", "--store", store, "check", "p")
    assert changed.exit_code == 1 and "p: out of date: the data's content changed" in changed.output
    data.unlink()
    missing = _run("profiles", "--store", store, "check")
    assert missing.exit_code == 2 and "data missing" in missing.output


def test_summaries_keep_no_view_of_a_batch() -> None:
    # Memory stays bounded only if the sample copies what it keeps: a strided view would hold
    # every batch's buffer alive until the end of the run.
    profiler = ColumnProfiler("x", pa.int64(), Settings(distinct_cap=10), expected_rows=1_000)
    batch = pa.array(np.arange(500, dtype=np.int64))
    profiler.add(batch)
    profiler.add(pa.array(np.arange(500, 1_000, dtype=np.int64)))
    assert profiler.sample is not None and profiler.sample.chunks
    batch_memory = np.frombuffer(batch.buffers()[1], dtype=np.int64)
    assert not any(np.shares_memory(values, batch_memory) for values, _ in profiler.sample.chunks)


def test_a_rare_value_is_not_listed_from_a_sample() -> None:
    # Privacy rule for estimated columns: a value held by 2 rows, both picked by a sample that
    # keeps every 3rd row (weight 3 each, 6 >= min_count), must still not be written.
    profiler = ColumnProfiler("x", pa.int64(), Settings(min_count=5, distinct_cap=10), expected_rows=3 * (1 << 16))
    values = np.arange(3_000, dtype=np.int64) + 1_000
    values[[0, 3]] = 7  # rare: 2 rows, both at sampled positions
    values[6:36:3] = 8  # frequent: 10 rows, all sampled
    profiler.add(pa.array(values))
    listed = dict(map(tuple, column_entry(profiler)["top"]["values"]))
    assert profiler.sample is not None and profiler.sample.stride == 3
    assert 7 not in listed and listed[8] == 30
