"""The typed view of a profile against the document as Python's own `json` reads it: every field
the format defines is carried over, optional ones as None, and the view cannot be changed."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import pytest

from chainlint.profile.store import load_profile
from chainlint.profile.view import Profile

DEMO = Path(__file__).resolve().parent.parent / "examples" / ".chainlint" / "profiles" / "parcel_scans.json"


def test_every_field_of_the_demo_profile_is_read() -> None:
    document = json.loads(DEMO.read_text(encoding="utf-8"))
    profile = load_profile(DEMO)
    assert (profile.name, profile.rows, profile.created) == (document["name"], document["rows"], document["created"])
    assert profile.settings.min_count == document["settings"]["min_count"]
    assert [f.path for f in profile.source.files] == [f["path"] for f in document["source"]["files"]]
    assert [c.name for c in profile.columns] == list(document["columns"])
    for column in profile.columns:
        entry = document["columns"][column.name]
        assert (column.dtype, column.rows, column.nulls) == (entry["type"], entry["rows"], entry["nulls"])
        assert column.top is not None and [list(pair) for pair in column.top.values] == entry["top"]["values"]
        assert (column.histogram is None) == ("histogram" not in entry)
        if column.histogram is not None:
            assert list(column.histogram.bounds) == entry["histogram"]["bounds"]
            assert column.bounds == (entry["min"], entry["max"])
        assert column.distinct is not None and column.distinct.value == entry["distinct"]["value"]
        assert column.clustering == entry.get("clustering", 0.0) and column.redacted == entry.get("redacted", False)
    assert (profile.joint is None) == ("joint" not in document)


def test_joint_counts_absent_differ_from_none_counted() -> None:
    document = json.loads(DEMO.read_text(encoding="utf-8"))
    document.pop("joint", None)
    assert Profile.from_document(document).joint is None  # made with --no-joint: no gaps to report
    assert Profile.from_document({**document, "joint": []}).joint == ()  # looked for chains, found none


def test_the_view_is_read_only() -> None:
    profile = load_profile(DEMO)
    with pytest.raises(dataclasses.FrozenInstanceError):
        profile.rows = 1  # type: ignore[misc]
    with pytest.raises(TypeError):
        profile.by_name["depot"] = profile.columns[0]  # type: ignore[index]


def test_a_run_reads_a_store_once_per_state_of_its_files(tmp_path: Path) -> None:
    from chainlint.estimate.stores import LoadedStores

    (tmp_path / "profiles").mkdir()
    target = tmp_path / "profiles" / "scans.json"
    target.write_bytes(DEMO.read_bytes())
    stores = LoadedStores()
    first = stores.load(tmp_path)
    assert stores.load(tmp_path) is first and first.estimator("scans") is first.estimator("scans")
    document = json.loads(DEMO.read_text(encoding="utf-8"))
    target.write_text(json.dumps({**document, "rows": document["rows"] + 1}), encoding="utf-8")
    again = stores.load(tmp_path)
    assert again is not first and again.profiles.profiles["scans"].rows == document["rows"] + 1
    assert LoadedStores().load(tmp_path) is not again  # another run's object reads the store itself


def test_the_view_travels_between_processes() -> None:
    import pickle

    profile = load_profile(DEMO)
    assert profile.column("depot") is not None
    assert pickle.loads(pickle.dumps(profile)) == profile
