"""Before/after pairs for every form and layout, and the safety of `check --diff` / `--fix`."""

from __future__ import annotations

import json
import os
import stat
from pathlib import Path

import pytest
from click.testing import CliRunner

from chainlint.engine.run import analyse_source
from chainlint.cli import main
from chainlint.parse.source import text_source
from chainlint.rewrite.permute import RewriteError, apply_edits, chain_edit
from chainlint.rewrite.verify import verify

CASES = {
    "one step per line, comments travel with their step (trailing and above)": (
        "out = (\n    scans\n    .loc[lambda d: d.a > 1]  # common\n    # a line of its own\n    .query('b == 2')  # rare\n)\n",
        (1, 0),
        "out = (\n    scans\n    # a line of its own\n    .query('b == 2')  # rare\n    .loc[lambda d: d.a > 1]  # common\n)\n",
    ),
    "several steps on one line stay on one line": (
        "out = scans[scans.a > 1].query('b == 2').dropna(subset=['c'])  # note\n",
        (2, 1, 0),
        "out = scans.dropna(subset=['c']).query('b == 2')[lambda scans: scans.a > 1]  # note\n",
    ),
    "backslash continuation": (
        "out = scans \\\n    .loc[lambda d: d.a > 1] \\\n    .loc[lambda d: d.b == 2]\n",
        (1, 0),
        "out = scans \\\n    .loc[lambda d: d.b == 2] \\\n    .loc[lambda d: d.a > 1]\n",
    ),
    "statement run: the first statement keeps its source frame": (
        "x = raw[raw.a > 1]\nx = x.query('b == 2')\nx = x[x.c.isin([1, 2])]\n",
        (2, 1, 0),
        "x = raw[lambda x: x.c.isin([1, 2])]\nx = x.query('b == 2')\nx = x[lambda raw: raw.a > 1]\n",
    ),
    "statement run keeps a mask that stays with its frame": (
        "x = raw.query('a > 1')\nx = x[x.b == 2]\n",
        (1, 0),
        "x = raw[lambda x: x.b == 2]\nx = x.query('a > 1')\n",
    ),
    "tabs and trailing commas": (
        "def f(scans):\n\treturn (\n\t\tscans\n\t\t.loc[lambda d: d.a.isin([\n\t\t\t1,\n\t\t\t2,\n\t\t])]\n\t\t.query('b == 2')\n\t)\n",
        (1, 0),
        "def f(scans):\n\treturn (\n\t\tscans\n\t\t.query('b == 2')\n\t\t.loc[lambda d: d.a.isin([\n\t\t\t1,\n\t\t\t2,\n\t\t])]\n\t)\n",
    ),
    "non-ASCII names and literals": (
        "größe = 'ü'; out = df[df['größe'] == 'groß'].loc[lambda d: d.straße != 'Ω']\n",
        (1, 0),
        "größe = 'ü'; out = df.loc[lambda d: d.straße != 'Ω'][lambda df: df['größe'] == 'groß']\n",
    ),
    "a chain inside a call, an f-string nearby": (
        "label = f\"{name}: {len(rows)}\"\nshow(df.loc[df.a > 1, :].query(f'b == 2' if True else 'b'), title=f\"{label!r}\")\nshow(scans.query('x == 1').query('y == 2'))\n",
        (1, 0),
        None,
    ),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_before_and_after(name: str) -> None:
    before, order, after = CASES[name]
    source = text_source("case.py", before)
    chains = analyse_source(source).chains
    chain = chains[-1] if after is None else chains[0]
    if after is None:
        before_last = before.splitlines(keepends=True)[-1]
        after = before.replace(before_last, "show(scans.query('y == 2').query('x == 1'))\n")
    edit = chain_edit(source, chain, order)
    new = apply_edits(before, [edit])
    assert new == after
    verify(source, new, [(chain, order)])


def test_barrier_steps_never_move() -> None:
    source = text_source("b.py", "out = df[lambda d: d.a > 1][lambda d: d.b > d.b.mean()][lambda d: d.c == 1]\n")
    (chain,) = analyse_source(source).chains
    with pytest.raises(RewriteError, match="may not move"):
        chain_edit(source, chain, (1, 0, 2))
    with pytest.raises(RewriteError, match="across a barrier"):
        chain_edit(source, chain, (2, 1, 0))


def test_an_outer_mask_is_a_barrier() -> None:
    source = text_source("o.py", "out = df[lambda d: d.a > 1][df.b == 2][lambda d: d.c == 3]\n")
    (chain,) = analyse_source(source).chains
    assert not chain.steps[1].movable and "realigned by index" in chain.steps[1].barrier.reason
    with pytest.raises(RewriteError, match="may not move"):
        chain_edit(source, chain, (1, 0, 2))


def test_a_dotted_frame_cannot_become_a_lambda() -> None:
    source = text_source("d.py", "out = self.df[self.df.a > 1].query('b == 2')\n")
    (chain,) = analyse_source(source).chains
    with pytest.raises(RewriteError, match="lambda"):
        chain_edit(source, chain, (1, 0))


def test_verify_refuses_a_change_outside_the_chain() -> None:
    before = "x = 1\nout = df[lambda d: d.a > 1].query('b == 2')\n"
    source = text_source("v.py", before)
    (chain,) = analyse_source(source).chains
    new = apply_edits(before, [chain_edit(source, chain, (1, 0))]).replace("x = 1", "x = 2")
    with pytest.raises(RewriteError, match="outside the chain"):
        verify(source, new, [(chain, (1, 0))])


# -- check --diff / --fix on a project with a profile ---------------------------------------
DEMO = Path(__file__).parent.parent / "examples"


def _run(*args: str):
    return CliRunner().invoke(main, ["check", "--jobs", "1", *args])


def test_diff_changes_nothing(project: Path) -> None:
    before = (project / "pipeline.py").read_bytes()
    result = _run("--diff", str(project / "pipeline.py"))
    assert result.exit_code == 1
    assert "+        .loc[lambda d: (d[\"weight_kg\"] > 0.5) & (d[\"depot\"] == \"WEST\")]" in result.output
    assert (project / "pipeline.py").read_bytes() == before


def test_fix_writes_once_and_is_idempotent(project: Path) -> None:
    path = project / "pipeline.py"
    path.chmod(0o640)
    first = _run("--fix", str(path))
    assert "fixed: reorder" in first.output
    assert stat.S_IMODE(path.stat().st_mode) == 0o640
    text = path.read_text()
    assert text.index('"damaged"') < text.index("0.5)") < text.index('"WEST"')
    second = _run("--fix", str(path))
    assert "reorder" not in second.output and path.read_text() == text
    assert sorted(p.name for p in project.iterdir()) == [".chainlint", "pipeline.py"]


def test_fix_keeps_crlf_and_bom(project: Path) -> None:
    path = project / "pipeline.py"
    original = path.read_text(encoding="utf-8")
    path.write_bytes(b"\xef\xbb\xbf" + original.replace("\n", "\r\n").encode("utf-8"))
    assert "fixed: reorder" in _run("--fix", str(path)).output
    data = path.read_bytes()
    # Fusing two steps of a method chain into one mask joins their lines, and two statements of
    # a run become one: two line breaks fewer.
    assert data.startswith(b"\xef\xbb\xbf") and data.count(b"\r\n") == original.count("\n") - 2 and b"\n" not in data.replace(b"\r\n", b"")


def test_keep_comment_suppresses_and_is_counted(project: Path) -> None:
    path = project / "pipeline.py"
    path.write_text(path.read_text().replace("    return (\n        scans\n        .loc[lambda d: d[\"weight_kg\"]",
                                             "    return (  # chainlint: keep reorder\n        scans\n        .loc[lambda d: d[\"weight_kg\"]", 1))
    result = _run("--format", "json", str(path))
    report = json.loads(result.output)
    assert report["suppressed"] == 1
    assert [f["rule"] for f in report["findings"]] == ["reorder", "never-matches"]
    assert "1 kept as written" in _run(str(path)).output


def test_json_findings_carry_the_edit(project: Path) -> None:
    report = json.loads(_run("--format", "json", str(project / "pipeline.py")).output)
    fix = report["findings"][0]["fix"]
    assert fix["line"] == 16 and fix["text"].startswith('.loc[lambda d: d["status"] == "damaged"]')
    lines = (project / "pipeline.py").read_text().splitlines(keepends=True)
    start = sum(len(l) for l in lines[: fix["line"] - 1]) + fix["column"] - 1
    end = sum(len(l) for l in lines[: fix["end_line"] - 1]) + fix["end_column"] - 1
    text = "".join(lines)
    assert "damaged" in text[start:end] and "weight_kg" in text[start:end]


def test_a_file_changed_on_disk_is_left_alone(project: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from chainlint.rewrite import fixes

    path = project / "pipeline.py"
    real = fixes.write_fix

    def edit_then_write(fix):  # type: ignore[no-untyped-def]
        path.write_text(path.read_text() + "\n# edited meanwhile\n")
        return real(fix)

    monkeypatch.setattr(fixes, "write_fix", edit_then_write)
    result = _run("--fix", str(path))
    assert "not rewritten: the file changed on disk" in result.output
    assert path.read_text().endswith("# edited meanwhile\n") and '"weight_kg"] > 0.5]\n        .loc[lambda d: d["depot"]' in path.read_text()


def test_a_file_with_a_syntax_error_is_never_written(project: Path) -> None:
    path = project / "pipeline.py"
    path.write_text(path.read_text() + "\ndef broken(:\n")
    before = path.read_bytes()
    result = _run("--fix", str(path))
    assert result.exit_code == 2 and path.read_bytes() == before
    assert sorted(os.listdir(project)) == [".chainlint", "pipeline.py"]
