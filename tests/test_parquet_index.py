"""A frame's index stored in a Parquet or Arrow file (`__index_level_0__`, or a column named as
the index, recorded in the pandas metadata) is the index to pandas, not a column:
`pd.read_parquet`/`pd.read_feather` (the ground truth) restore it as the frame's index, and the
profile has the same columns, locally and read piece by piece."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pyarrow as pa
import pyarrow.ipc as paipc
import pytest

from chainlint.profile.build import profile_dataset
from chainlint.profile.pieces import piece_batches, plan_pieces
from chainlint.profile.readers import memory_dataset, open_dataset
from chainlint.profile.settings import Settings

FRAME = pd.DataFrame({"weight": [1.5, 2.5, 3.5], "depot": ["north", "south", "north"]})
INDEXES = {
    "unnamed": FRAME.set_axis([10, 20, 30]),
    "named": FRAME.set_axis(pd.Index([10, 20, 30], name="parcel")),
    "multi": FRAME.set_axis(pd.MultiIndex.from_tuples([(1, "x"), (2, "y"), (3, "z")], names=["route", None])),
    "labels": FRAME.set_axis(pd.Index(["a", "b", "c"], name="code")),
    "range": FRAME,
}


def _written(tmp_path: Path, name: str, kind: str) -> Path:
    frame = INDEXES[name]
    if kind == "parquet":
        path = tmp_path / f"{name}.parquet"
        frame.to_parquet(path)
    else:
        path = tmp_path / f"{name}.arrow"
        table = pa.Table.from_pandas(frame)
        with paipc.new_file(path, table.schema) as writer:
            writer.write_table(table)
    return path


@pytest.mark.parametrize("kind", ["parquet", "arrow"])
@pytest.mark.parametrize("name", sorted(INDEXES))
def test_the_index_is_not_a_profiled_column(tmp_path: Path, name: str, kind: str) -> None:
    path = _written(tmp_path, name, kind)
    truth = pd.read_parquet(path) if kind == "parquet" else pd.read_feather(path)  # pandas: the reference
    assert list(truth.columns) == ["weight", "depot"]
    document = profile_dataset(open_dataset([str(path)]), "p", Settings(min_count=1))
    assert list(document["columns"]) == list(truth.columns)
    assert {c: e["type"] for c, e in document["columns"].items()} == {c: str(t) for c, t in truth.dtypes.items()}
    plan = plan_pieces([str(path)])
    assert plan.schema.names == list(truth.columns)
    for piece in plan.pieces:
        for table in piece_batches(piece, plan.layout):
            assert table.schema.names == list(truth.columns)


def test_a_live_frames_index_is_not_a_column() -> None:
    table = pa.Table.from_pandas(INDEXES["named"])
    dataset = memory_dataset(table)
    assert dataset.schema.names == ["weight", "depot"]
    assert [b.schema.names for b in dataset.batches] == [["weight", "depot"]]
