"""The attacker's view of a committed profile.

Data with planted rare values (each held by fewer than `--min-count` rows) is profiled, and
every field a reader of the committed file holds is played against it: bounds, histograms, top
values and their complement, the distinct-count sketch (a dictionary attack with the hash
functions the profile format once documented), joint counts and their complements. None may
confirm a planted value.
"""

from __future__ import annotations

import base64
import json
import zlib
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow as pa
from click.testing import CliRunner
from hypothesis import given
from hypothesis import strategies as st

from chainlint.cli import main
from chainlint.redaction import redact_value
from chainlint.profile.privacy import fold_rare, hide_small_cells
from chainlint.profile.sketches import HLL_PRECISION, hash32, hash_strings
from chainlint.profile.store import load_document, redaction_key

MIN = 5
ROWS = 2_000
SKETCH_KEY = "5e" * 32  # a fixed store key, so that every run of these tests is the same


def _store(tmp_path: Path) -> Path:
    store = tmp_path / "store"
    (store / "private").mkdir(parents=True, exist_ok=True)
    (store / "private" / "sketch-key").write_text(SKETCH_KEY + "\n")
    return store


def _profile(tmp_path: Path, frame: pd.DataFrame, name: str, *options: str) -> dict:
    data = tmp_path / f"{name}.parquet"
    frame.to_parquet(data)
    store = _store(tmp_path)
    result = CliRunner().invoke(main, ["profile", str(data), "--name", name, "--store", str(store),
                                       "--min-count", str(MIN), *options])
    assert result.exit_code == 0, result.output
    return load_document(store / "profiles" / f"{name}.json")


def _people(young: int, old: int, born: str, rare_flag: bool) -> pd.DataFrame:
    """2,000 people: ages 18-90 and birth dates 1940-2005 (many rows each), plus one planted
    youngest, one oldest and one earliest birth date; a flag that is 'no' but for one row."""
    rng = np.random.default_rng(7)
    age = rng.integers(18, 91, ROWS)
    age[[100, 1_500]] = [young, old]
    born_days = rng.integers(np.datetime64("1940-01-01", "D").astype(int), np.datetime64("2005-12-31", "D").astype(int), ROWS)
    dates = born_days.astype("datetime64[D]")
    dates[900] = np.datetime64(born)
    flag = np.full(ROWS, "no", dtype=object)
    if rare_flag:
        flag[1_234] = "yes"
    return pd.DataFrame({"age": age, "born": pd.to_datetime(dates).astype("datetime64[s]"), "flag": pd.array(flag, dtype="str")})


def _without_sketch(column: dict) -> dict:
    return {key: value for key, value in column.items() if key != "sketch"}


def test_bounds_do_not_move_with_rare_extremes(tmp_path: Path) -> None:
    # An age 7 and 103 and a birth date 1931-05-17, each held by one person, must not show,
    # nor may the profile tell them from an age 3 and 117 and a birth date 1929-02-03.
    first = _profile(tmp_path, _people(7, 103, "1931-05-17", True), "first")
    second = _profile(tmp_path, _people(3, 117, "1929-02-03", True), "second")
    for name in ("age", "born"):
        assert _without_sketch(first["columns"][name]) == _without_sketch(second["columns"][name]), name
    age = first["columns"]["age"]
    assert not {7, 103} & {age["min"], age["max"], *age["histogram"]["bounds"]}
    assert "1931-05-17" not in json.dumps(first["columns"]["born"])
    # Each end is at least min-count rows in from the true extreme.
    frame = _people(7, 103, "1931-05-17", True)
    assert (frame.age <= age["min"]).sum() >= MIN and (frame.age >= age["max"]).sum() >= MIN
    born = first["columns"]["born"]
    assert (frame.born <= pd.Timestamp(born["min"])).sum() >= MIN
    assert (frame.born >= pd.Timestamp(born["max"])).sum() >= MIN


def test_no_bound_is_a_value_held_by_few_rows(tmp_path: Path) -> None:
    # 450 distinct odd numbers, each held by one row: three significant digits leave them as
    # they are, so every equi-depth bound would be one row's value.
    values = np.arange(101, 1_000, 2)
    frame = pd.DataFrame({"code": values, "share": values / 997.0})
    document = _profile(tmp_path, frame, "codes")
    for name in ("code", "share"):
        column = document["columns"][name]
        held = set(frame[name].tolist())
        stored = {column["min"], column["max"], *column["histogram"]["bounds"]}
        assert not stored & held, (name, sorted(stored & held)[:5])


def test_a_rare_value_beside_a_common_one_is_not_told_by_complement(tmp_path: Path) -> None:
    # 1,999 'no' and one 'yes': listing 'no' with 1,999 rows (or counting one unlisted value)
    # tells whoever knows the column holds yes/no that one person said yes.
    with_yes = _profile(tmp_path, _people(7, 103, "1931-05-17", True), "yes")["columns"]["flag"]
    without = _profile(tmp_path, _people(7, 103, "1931-05-17", False), "no")["columns"]["flag"]
    assert _without_sketch(with_yes) == _without_sketch(without)


def test_few_rare_values_of_a_known_set_are_not_told_by_their_number(tmp_path: Path) -> None:
    # Everyone knows the five statuses; 'lost', 'held' and 'returned' occur twice each. Counting
    # three unlisted values (6 rows) would tell that all three occur.
    common = ["delivered"] * 1_500 + ["late"] * 494
    rare = ["lost", "lost", "held", "held", "returned", "returned"]
    with_rare = _profile(tmp_path, pd.DataFrame({"status": pd.array(common + rare, dtype="str")}), "rare")
    without = _profile(tmp_path, pd.DataFrame({"status": pd.array(common + ["delivered"] * 6, dtype="str")}), "none")
    column = _without_sketch(with_rare["columns"]["status"])
    assert column == _without_sketch(without["columns"]["status"])
    assert column["suppressed"] == {"values": 0, "rows": 0} and column["distinct"]["value"] == 2


def _mail_frame() -> tuple[pd.DataFrame, list[str], list[int]]:
    """50 addresses used 30 times each and 500 used once (the planted ones); room numbers
    likewise: 50 common, 500 rare."""
    rng = np.random.default_rng(11)
    common = [f"desk{i}@depot.invalid" for i in range(50)]
    rare = [f"courier{i:04d}@depot.invalid" for i in range(500)]
    mails = np.array(common * 30 + rare, dtype=object)
    rooms = np.concatenate([np.repeat(np.arange(50) * 7 + 10_000, 30), np.arange(500) * 13 + 20_003])
    order = rng.permutation(len(mails))
    frame = pd.DataFrame({"mail": pd.array(mails[order], dtype="str"), "room": rooms[order]})
    return frame, rare, (np.arange(500) * 13 + 20_003).tolist()


def _register_guesses(sketch: str) -> list[np.ndarray]:
    """Every way an attacker might read registers out of a stored sketch: the zlib-compressed
    bytes the format once used, the raw bytes, and 5-bit packed registers after a 16-byte tag."""
    raw = base64.b64decode(sketch)
    guesses = [np.frombuffer(raw, dtype=np.uint8)]
    try:
        guesses.append(np.frombuffer(zlib.decompress(raw), dtype=np.uint8))
    except zlib.error:
        pass
    bits = np.unpackbits(np.frombuffer(raw[16:], dtype=np.uint8))
    usable = bits[: bits.size // 5 * 5].reshape(-1, 5)
    guesses.append(np.packbits(np.pad(usable, ((0, 0), (3, 0))), axis=1).ravel())
    return [g[: 1 << HLL_PRECISION] for g in guesses if g.size >= 1 << HLL_PRECISION]


def _hit_rate(registers: np.ndarray, hashes: np.ndarray) -> float:
    """Share of candidates whose register is at least the rank their hash gives: always so for
    a value the sketch was built from."""
    index = hashes & np.uint32((1 << HLL_PRECISION) - 1)
    rest = hashes >> np.uint32(HLL_PRECISION)
    rank = np.array([32 - HLL_PRECISION - int(r).bit_length() + 1 for r in rest])
    return float(np.mean(registers[index] >= rank))


def test_dictionary_attack_on_the_sketches(tmp_path: Path) -> None:
    frame, rare_mails, rare_rooms = _mail_frame()
    document = _profile(tmp_path, frame, "mail", "--redact", "mail")
    absent_mails = [f"courier{i:04d}@depot.invalid" for i in range(500, 2_500)]
    absent_rooms = [r for r in range(20_000, 30_000) if r not in set(rare_rooms)][:2_000]
    attacks = {
        "mail": (hash_strings(pa.array(rare_mails)), hash_strings(pa.array(absent_mails))),
        "room": (hash32(np.array(rare_rooms, dtype=np.int64)), hash32(np.array(absent_rooms, dtype=np.int64))),
    }
    for name, (planted, absent) in attacks.items():
        for registers in _register_guesses(document["columns"][name]["sketch"]):
            gap = _hit_rate(registers, planted) - _hit_rate(registers, absent)
            assert abs(gap) < 0.1, (name, gap)
    # The redacted column's listed hashes do not name the rare addresses either.
    key = redaction_key(tmp_path / "store", create=False)
    listed = {value for value, _ in document["columns"]["mail"]["top"]["values"]}
    assert not {redact_value(key, m) for m in rare_mails} & listed
    assert not set(rare_rooms) & {value for value, _ in document["columns"]["room"]["top"]["values"]}


def _cells(subsets: list) -> dict[int, int]:
    """Rows passing exactly each pattern of predicates, from rows passing each subset
    (inclusion-exclusion): what a reader derives from the stored counts."""
    counts = dict(subsets)
    assert all(isinstance(c, int) for c in counts.values()), counts
    size = max(counts) + 1
    cells = np.array([counts[m] for m in range(size)], dtype=np.int64)
    bit = 1
    while bit < size:
        masks = np.arange(size)
        without = masks[(masks & bit) == 0]
        cells[without] -= cells[without | bit]
        bit <<= 1
    return dict(enumerate(cells.tolist()))


def test_joint_counts_and_their_complements_hide_small_groups(tmp_path: Path) -> None:
    rng = np.random.default_rng(5)
    rows = 600
    salary = rng.integers(20_000, 120_000, rows)
    salary[77] = 950_000  # one person fails `salary < 900000`
    depot = np.where(np.arange(rows) < 300, "WEST", "EAST").astype(object)
    shift = np.where(np.arange(rows) < 299, "day", "night").astype(object)  # one WEST row works nights
    rare = np.where(np.arange(rows) == 3, "Q", "A").astype(object)
    frame = pd.DataFrame({"salary": salary, "depot": pd.array(depot, dtype="str"),
                          "shift": pd.array(shift, dtype="str"), "grade": pd.array(rare, dtype="str")})
    (tmp_path / "src").mkdir()
    (tmp_path / "src" / "pipe.py").write_text(
        "# chainlint: profile=staff\n"
        "low = staff[lambda d: d.salary < 900000][lambda d: d.depot == 'WEST']\n"
        "# chainlint: profile=staff\n"
        "west = staff[lambda d: d.depot == 'WEST'][lambda d: d['shift'] == 'day'][lambda d: d.grade == 'Q']\n"
    )
    document = _profile(tmp_path, frame, "staff", "--for", str(tmp_path / "src"))
    assert len(document["joint"]) == 2
    for entry in document["joint"]:
        counts = dict(entry["subsets"])
        assert counts[0] == rows
        for mask, count in counts.items():
            assert isinstance(count, int), (entry["predicates"], mask, count)  # "below" vs 0 tells
            assert count == 0 or MIN <= count, (entry["predicates"], mask, count)
            assert rows - count == 0 or MIN <= rows - count, (entry["predicates"], mask, count)
        for mask, cell in _cells(entry["subsets"]).items():
            assert cell == 0 or cell >= MIN, (entry["predicates"], mask, cell)


def test_the_sealed_sketch_still_merges_and_names_a_wrong_key(tmp_path: Path) -> None:
    frame, _, _ = _mail_frame()
    store = _store(tmp_path)
    frame.iloc[:1_000].to_parquet(tmp_path / "a.parquet")
    frame.iloc[1_000:].to_parquet(tmp_path / "b.parquet")
    for part in ("a", "b"):
        assert CliRunner().invoke(main, ["profile", str(tmp_path / f"{part}.parquet"), "--name", part,
                                         "--store", str(store)]).exit_code == 0
    merged = CliRunner().invoke(main, ["profiles", "--store", str(store), "merge", "ab", "a", "b"])
    assert merged.exit_code == 0, merged.output
    distinct = load_document(store / "profiles" / "ab.json")["columns"]["mail"]["distinct"]
    assert abs(distinct["value"] - 550) <= 3 * 0.01625 * 550  # the published HyperLogLog error
    # The store's key sealed the parts; another key cannot open them, and says so.
    (store / "private" / "sketch-key").write_text("a1" * 32 + "\n")
    refused = CliRunner().invoke(main, ["profiles", "--store", str(store), "merge", "ab", "a", "b"])
    assert refused.exit_code == 2
    assert "profile 'a', column 'mail': its sketch was sealed with another key" in refused.output
    # A part written by the format that stored readable sketches is refused too.
    old = json.loads((store / "profiles" / "b.json").read_text())
    old["format_version"] = 1
    (store / "profiles" / "b.json").write_text(json.dumps(old))
    (store / "private" / "sketch-key").write_text(SKETCH_KEY + "\n")
    refused = CliRunner().invoke(main, ["profiles", "--store", str(store), "merge", "ab", "a", "b"])
    assert refused.exit_code == 2 and "profile 'b', column 'mail': format version 1" in refused.output


def test_the_sketch_key_stays_out_of_the_repository(tmp_path: Path) -> None:
    frame, _, _ = _mail_frame()
    frame.to_parquet(tmp_path / "m.parquet")
    store = tmp_path / ".chainlint"
    assert CliRunner().invoke(main, ["profile", str(tmp_path / "m.parquet"), "--name", "m", "--store", str(store)]).exit_code == 0
    key = store / "private" / "sketch-key"
    assert len(key.read_text().strip()) == 64 and key.stat().st_mode & 0o077 == 0
    assert (store / "private" / ".gitignore").read_text() == "*\n"  # git ignores the folder
    assert "sketch-key" not in (store / "profiles" / "m.json").read_text()


@given(st.lists(st.integers(0, 7), min_size=1, max_size=300), st.integers(1, 3), st.integers(1, 8))
def test_no_small_group_is_derivable_from_any_joint_table(codes: list[int], steps: int, min_count: int) -> None:
    # Random rows, each passing a random pattern of `steps` predicates.
    patterns = np.array(codes, dtype=np.int64) % (1 << steps)
    subsets = np.array([np.count_nonzero((patterns & mask) == mask) for mask in range(1 << steps)])
    stored = hide_small_cells(subsets, min_count)
    cells = _cells([[mask, int(count)] for mask, count in enumerate(stored)])
    assert stored[0] == len(codes)  # every row is still counted once
    if len(codes) >= min_count:
        assert all(cell == 0 or cell >= min_count for cell in cells.values()), cells


@given(st.lists(st.integers(1, 12), min_size=1, max_size=40), st.integers(1, 6))
def test_folded_counts_never_leave_a_small_remainder(counts: list[int], min_count: int) -> None:
    original = np.array(counts, dtype=np.int64)
    folded = fold_rare(original, min_count)
    assert folded.sum() == original.sum()
    rare = (folded > 0) & (folded < min_count)
    if not (original < min_count).all():
        assert folded[rare].sum() == 0 or (folded[rare].sum() >= min_count and rare.sum() >= min_count)


def test_joint_counts_never_test_a_redacted_column(tmp_path: Path) -> None:
    # A chain naming an address of a redacted column: its count would confirm the address.
    frame, rare, _ = _mail_frame()
    (tmp_path / "src").mkdir()
    (tmp_path / "src" / "pipe.py").write_text(
        "# chainlint: profile=mail\n"
        f"out = mails[lambda d: d.mail == '{rare[0]}'][lambda d: d.room > 20000][lambda d: d.room < 25000]\n"
    )
    data = tmp_path / "mail.parquet"
    frame.to_parquet(data)
    result = CliRunner().invoke(main, ["profile", str(data), "--name", "mail", "--store", str(_store(tmp_path)),
                                       "--redact", "mail", "--for", str(tmp_path / "src")])
    assert result.exit_code == 0, result.output
    assert f"skipped `mail == '{rare[0]}'`: it reads a redacted column" in result.output
    document = load_document(tmp_path / "store" / "profiles" / "mail.json")
    assert [entry["predicates"] for entry in document["joint"]] == [["room < 25000", "room > 20000"]]
