"""Partial profiles without a cluster: pieces counted apart and merged give the local profile
byte for byte (exact columns), and a partial leaves its process only sealed."""

from __future__ import annotations

import json
import pickle
import secrets
import tempfile
from pathlib import Path
from unittest.mock import patch

import numpy as np
import pyarrow as pa
import pyarrow.csv as pacsv
import pyarrow.ipc as paipc
import pyarrow.parquet as pq
import pytest
from hypothesis import given
from hypothesis import strategies as st

from chainlint.profile.build import profile_dataset
from chainlint.profile.columns import Settings
from chainlint.profile.errors import DataError
from chainlint.profile.format import dumps
from chainlint.profile.partial import count_piece, merge_partials, partial_document
from chainlint.profile import csv_reader, pieces
from chainlint.profile.files import sha256_of
from chainlint.profile.pieces import file_digest, plan_pieces
from chainlint.profile.readers import open_dataset

pytest.importorskip("cryptography", reason="the sealing needs cryptography: pip install '.[dask]'")
from chainlint.cluster.sealing import PartialKeyError, open_partial, seal_partial  # noqa: E402

SETTINGS = Settings(min_count=3, sketch_key=b"s" * 32, redaction_key=b"r" * 32, redact=frozenset({"code"}))


@pytest.fixture(autouse=True)
def _a_piece_per_row_group(monkeypatch: pytest.MonkeyPatch) -> None:
    """Small row groups, each its own piece: every seam between them is merged."""
    monkeypatch.setattr(pieces, "PARQUET_PIECE_ROWS", 1)


def _tree(path: Path | str, settings: Settings = SETTINGS, batch_rows: int = 7) -> dict:
    """Pieces counted one by one, sealed, and merged pairwise level by level, as on a cluster."""
    plan = plan_pieces([str(path)], batch_rows=batch_rows)
    key = secrets.token_bytes(32)
    level = [seal_partial(count_piece(piece, plan.layout, settings, plan.expected_rows or 0), key) for piece in plan.pieces]
    while len(level) > 1:
        pairs = [merge_partials(open_partial(a, key), open_partial(b, key)) for a, b in zip(level[::2], level[1::2])]
        level = [seal_partial(p, key) for p in pairs] + level[len(pairs) * 2:]
    files = [{"path": f.path, "bytes": f.bytes, "modified": f.modified} for f in plan.files]
    return partial_document(open_partial(level[0], key), "t", settings, {"kind": plan.kind, "files": files, "fingerprint": "-"})


def _local(path: Path, settings: Settings = SETTINGS, batch_rows: int = 7) -> dict:
    document = profile_dataset(open_dataset([str(path)], batch_rows=batch_rows), "t", settings)
    document["source"]["fingerprint"] = "-"
    return document


def test_row_group_boundaries_nulls_and_runs_merge_to_the_local_profile(tmp_path: Path) -> None:
    # Runs of equal values that cross row-group boundaries or end at one, a group of nulls
    # only, NaN, rare values and a redacted column: every part of `finish` sees merged counts.
    runs = ["a"] * 9 + ["b"] * 6 + [None] * 10 + ["b"] * 4 + ["c"] * 11 + ["rare"]
    table = pa.table({
        "city": runs,
        "depot": pa.array(runs, pa.string()).dictionary_encode(),
        "weight": [float(i % 7) if i % 5 else float("nan") for i in range(len(runs))],
        "stop": list(range(len(runs))),
        "code": [f"c{i % 4}" for i in range(len(runs))],
        "when": pa.array(np.datetime64("2025-01-01T00:00", "us") + np.arange(len(runs)) // 8 * np.timedelta64(1, "D")),
    })
    path = tmp_path / "t.parquet"
    pq.write_table(table, path, row_group_size=5)
    merged, local = _tree(path), _local(path)
    merged["created"] = local["created"]
    assert dumps(merged) == dumps(local)
    assert local["columns"]["city"]["clustering"] > 0  # the runs were seen


def test_estimated_columns_merge_deterministically(tmp_path: Path) -> None:
    rng = np.random.default_rng(7)
    path = tmp_path / "wide.parquet"
    pq.write_table(pa.table({"id": rng.integers(0, 10**9, 20_000), "few": rng.integers(0, 5, 20_000)}), path, row_group_size=3_000)
    settings = Settings(distinct_cap=500, sketch_key=b"s" * 32)
    first, second, local = _tree(path, settings, 1000), _tree(path, settings, 1000), _local(path, settings, 1000)
    second["created"] = first["created"]
    assert dumps(first) == dumps(second)
    assert first["columns"]["few"] == local["columns"]["few"]
    assert first["columns"]["id"]["distinct"] == local["columns"]["id"]["distinct"]  # the same registers


def test_a_partial_travels_sealed(tmp_path: Path) -> None:
    path = tmp_path / "t.parquet"
    pq.write_table(pa.table({"name": ["parcel-7f3a9"] + ["common"] * 20}), path)
    plan = plan_pieces([str(path)])
    partial = count_piece(plan.pieces[0], plan.layout, SETTINGS, 21)
    assert b"parcel-7f3a9" in pickle.dumps(partial)  # the rare value is in the partial's counts
    key = secrets.token_bytes(32)
    sealed = seal_partial(partial, key)
    assert b"parcel-7f3a9" not in sealed and b"common" not in sealed
    assert SETTINGS.sketch_key not in pickle.dumps(partial)  # the store's keys stay on the client
    assert open_partial(sealed, key).rows == 21
    with pytest.raises(PartialKeyError):
        open_partial(sealed, secrets.token_bytes(32))
    with pytest.raises(PartialKeyError):
        open_partial(sealed[:-1] + bytes([sealed[-1] ^ 1]), key)


def test_merged_estimates_stay_within_their_stated_error(tmp_path: Path) -> None:
    # Counts estimated from samples (1,001 values past a cap of 300), checked against pandas'
    # `value_counts`: "daily" repeats its 1,001 values with a period that divides the pieces'
    # length (100 row groups of 2,002 rows), so pieces whose picks all started at their first
    # row would pick the same values in each piece; "spread" holds values in no order.
    rows, period = 100 * 2002, 1001
    rng = np.random.default_rng(11)
    table = pa.table({"daily": np.arange(rows) % period, "spread": rng.integers(0, period, rows)})
    path = tmp_path / "periodic.parquet"
    pq.write_table(table, path, row_group_size=2 * period)
    settings = Settings(distinct_cap=300, sketch_key=b"s" * 32)
    for document in (_tree(path, settings, 2 * period), _local(path, settings, 2 * period)):
        for name in ("daily", "spread"):
            top, truth = document["columns"][name]["top"], table.to_pandas()[name].value_counts()
            assert top["exact"] is False and len(top["values"]) == 100
            for value, count in top["values"]:
                assert abs(count - truth[value]) <= top["error"], (name, value, count, truth[value], top["error"])


def _table(rows: int) -> pa.Table:
    rng = np.random.default_rng(5)
    return pa.table({
        "depot": pa.array([f"d{k}" for k in rng.integers(0, 9, rows)]),
        "stop": np.arange(rows) // 3,
        "weight": np.round(rng.lognormal(1, 1, rows), 1),
        "code": [f"c{i % 4}" for i in range(rows)],
    })


def _write(table: pa.Table, path: Path, batch: int = 500) -> None:
    if path.suffix == ".csv":
        pacsv.write_csv(table, path)
    elif path.suffix == ".jsonl":
        path.write_text("".join(json.dumps(row) + "\n" for row in table.to_pylist()))
    else:
        with paipc.new_file(path, table.schema) as writer:
            for start in range(0, table.num_rows, batch):
                writer.write_batch(table.slice(start, batch).to_batches()[0])


def test_arrow_files_are_cut_into_runs_of_record_batches(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(pieces, "ARROW_PIECE_ROWS", 1000)
    path = tmp_path / "t.arrow"
    _write(_table(10_000), path)  # 20 record batches of 500 rows
    plan = plan_pieces([str(path)])
    assert [p.batches for p in plan.pieces] == [(i, i + 2) for i in range(0, 20, 2)]
    assert plan.pieces[3].where() == f"record batches 6-7 of {path}"
    merged, local = _tree(path, batch_rows=300), _local(path, batch_rows=300)
    merged["created"] = local["created"]
    assert dumps(merged) == dumps(local)


@pytest.mark.parametrize("name", ["t.csv", "t.jsonl", "t.arrow"])
def test_csv_json_lines_and_arrow_behind_fsspec_urls(tmp_path: Path, monkeypatch: pytest.MonkeyPatch, name: str) -> None:
    # fsspec's in-memory filesystem (no network): the same bytes as the local file, read
    # through the URL, give the local profile; only the recorded source differs.
    fsspec = pytest.importorskip("fsspec", reason="fsspec comes with the dask extra: pip install '.[dask]'")
    monkeypatch.setattr(pieces, "ARROW_PIECE_ROWS", 1000)
    path = tmp_path / name
    _write(_table(3_000), path)
    url = f"memory:///chainlint-tests/{tmp_path.name}/{name}"  # as fsspec writes memory URLs
    with fsspec.open(url, "wb") as handle:
        handle.write(path.read_bytes())
    plan = plan_pieces([url])
    assert {p.path for p in plan.pieces} == {url} and len(plan.pieces) == (3 if name.endswith("arrow") else 1)
    assert [f.path for f in plan.files] == [url] and plan.files[0].bytes == path.stat().st_size
    assert file_digest(url) == sha256_of(str(path))
    merged, local = _tree(url, batch_rows=400), _local(path, batch_rows=400)
    assert merged["source"]["files"][0]["path"] == url
    merged["created"], merged["source"] = local["created"], local["source"]
    assert dumps(merged) == dumps(local)


def test_a_piece_error_names_the_file_as_its_path_and_the_piece_in_its_reason(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 1 << 12)  # 4 KB pieces
    path = tmp_path / "t.csv"
    lines = ["depot,stop"] + [f"d{i % 7},{i}" for i in range(2_000)]
    lines[1_500] += ",extra"  # line 1,501: one field too many, in a later piece
    path.write_text("\n".join(lines) + "\n")
    plan = plan_pieces([str(path)])
    bad = next(p for p in plan.pieces if p.start <= sum(len(x) + 1 for x in lines[:1_500]) < p.end)
    assert bad.start > 0
    with pytest.raises(DataError) as raised:
        list(pieces.piece_batches(bad, plan.layout))
    assert (raised.value.path, raised.value.line) == (str(path), 1_501)
    assert raised.value.reason == f"malformed CSV row (expected 2 fields, found 3) (in bytes {bad.start}-{bad.end})"


_ROW = st.one_of(
    st.builds(lambda n: f"{n},plain,z", st.integers(0, 999)),
    st.builds(lambda n, k: f'{n},"line\nbreak{"x" * k}\nin a value",z', st.integers(0, 999), st.integers(0, 120)),
    st.builds(lambda n: f'{n},"a ""quoted"" word",z', st.integers(0, 999)),
)


@given(rows=st.lists(_ROW, max_size=40), block=st.sampled_from([8, 16, 50, 200]), newline=st.booleans())
def test_a_url_is_cut_where_the_local_file_is(rows: list[str], block: int, newline: bool) -> None:
    # The stream read from a URL must give the memory map's pieces byte for byte: quoted values
    # with line breaks longer than a piece, doubled quotes, a last line with or without its end.
    fsspec = pytest.importorskip("fsspec", reason="fsspec comes with the dask extra: pip install '.[dask]'")
    text = ("n,word,z\n" + "\n".join(rows) + ("\n" if newline else "")).encode()
    with tempfile.TemporaryDirectory() as folder, patch.object(csv_reader, "_CSV_BLOCK", block):
        path = Path(folder) / "t.csv"
        path.write_bytes(text)
        url = f"memory:///chainlint-tests/cuts/{Path(folder).name}/t.csv"
        with fsspec.open(url, "wb") as handle:
            handle.write(text)
        local = [(bytes(buffer), start, quoted) for buffer, start, quoted in csv_reader._csv_pieces(str(path))]
        assert [(bytes(buffer), start, quoted) for buffer, start, quoted in csv_reader._csv_pieces(url)] == local
        fsspec.filesystem("memory").rm(url)


def test_a_csv_url_is_counted_in_byte_ranges(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Byte ranges of a CSV behind a file:// URL, read through fsspec (no network; fsspec's
    # memory filesystem hands every reader one shared handle, which a file's digest, read beside
    # the counting, would move), with values that hold line breaks across the cuts: the local
    # file's pieces and profile, and a bad row in a later range named by the URL, its line and
    # the range.
    pytest.importorskip("fsspec", reason="fsspec comes with the dask extra: pip install '.[dask]'")
    monkeypatch.setattr(csv_reader, "_CSV_BLOCK", 1 << 12)  # 4 KB pieces
    table = _table(3_000).append_column("note", pa.array([f"stop\n{i}" if i % 7 == 0 else "" for i in range(3_000)]))
    path = tmp_path / "t.csv"
    _write(table, path)
    url = f"file://{path}"
    plan = plan_pieces([url])
    assert len(plan.pieces) > 10 and any(p.quoted for p in plan.pieces) and {p.path for p in plan.pieces} == {url}
    assert [(p.start, p.end, p.quoted) for p in plan.pieces] == [(p.start, p.end, p.quoted) for p in plan_pieces([str(path)]).pieces]
    merged, local = _tree(url, batch_rows=400), _local(path, batch_rows=400)
    merged["created"], merged["source"] = local["created"], local["source"]
    assert dumps(merged) == dumps(local)
    lines = path.read_text().split("\n")
    wrong = next(k for k in range(2_000, 3_000) if lines[k].startswith('"d') and not lines[k].endswith('"stop'))  # a whole record
    lines[wrong] += ",1"  # one field too many, past the first range
    path.write_text("\n".join(lines))
    plan = plan_pieces([url])
    at = len("\n".join(lines[:wrong])) + 1
    bad = next(p for p in plan.pieces if p.start <= at < p.end)
    with pytest.raises(DataError) as raised:
        for piece in plan.pieces:
            count_piece(piece, plan.layout, SETTINGS, plan.expected_rows or 0)
    with pytest.raises(DataError) as locally:
        _local(path)
    assert (raised.value.path, raised.value.line) == (url, locally.value.line)  # the local reader's place
    assert raised.value.reason == f"{locally.value.reason} (in bytes {bad.start}-{bad.end})" and bad.start > 0


def test_small_row_groups_are_counted_in_runs(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(pieces, "PARQUET_PIECE_ROWS", 1_200)
    path = tmp_path / "t.parquet"
    pq.write_table(_table(10_000), path, row_group_size=500)  # 20 row groups of 500 rows
    plan = plan_pieces([str(path)])
    assert [(p.group, p.groups) for p in plan.pieces] == [(i, 3) for i in range(0, 18, 3)] + [(18, 2)]
    assert plan.pieces[1].where() == f"row groups 3-5 of {path}"
    merged, local = _tree(path, batch_rows=300), _local(path, batch_rows=300)
    merged["created"] = local["created"]
    assert dumps(merged) == dumps(local)


def test_a_damaged_row_group_is_named_by_its_file_and_place(tmp_path: Path) -> None:
    path = tmp_path / "t.parquet"
    pq.write_table(_table(10_000), path, row_group_size=1_000)
    chunk = pq.ParquetFile(path).metadata.row_group(5).column(1)  # `stop`, plain int64 pages
    data = bytearray(path.read_bytes())
    start = chunk.data_page_offset + 8
    data[start:start + 32] = b"\xab" * 32  # the page header no longer decodes
    path.write_bytes(bytes(data))
    plan = plan_pieces([str(path)])
    failed = {}
    for piece in plan.pieces:
        try:
            count_piece(piece, plan.layout, SETTINGS, plan.expected_rows or 0)
        except DataError as error:
            failed[piece.group] = error
    assert list(failed) == [5]
    assert failed[5].path == str(path) and failed[5].reason.endswith("(in row group 5)")
