"""Notebooks (`.ipynb`): analysed as one module in cell order, located per cell, rewritten cell
by cell with every other byte kept. nbformat's own validator (the official nbformat schema it
ships) judges the rewritten files; pandas judges that a rewritten cell keeps its result."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import nbformat
import pandas as pd
from click.testing import CliRunner

from chainlint.cli import main

DEMO = Path(__file__).parent.parent / "examples"
SCHEMA = Path(__file__).resolve().parent.parent.parent / "shared" / "schemas" / "sarif-schema-2.1.0.json"

CHAIN = (
    "late = (\n"
    "    scans\n"
    "    .loc[lambda d: d.weight_kg > 0.5]\n"
    "    .loc[lambda d: d.status == 'damaged']\n"
    ")\n"
    "late.head()"
)


def _cell(source: str | list[str], kind: str = "code", number: int = 0) -> dict:
    cell: dict = {"cell_type": kind, "id": f"cell-{number}", "metadata": {}, "source": source}
    if kind == "code":
        cell.update(execution_count=None, outputs=[])
    return cell


def _notebook(*cells: dict) -> dict:
    return {
        "cells": list(cells),
        "metadata": {"kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"}},
        "nbformat": 4,
        "nbformat_minor": 5,
    }


def _write(path: Path, document: dict, indent: int = 1) -> Path:
    # nbformat's own writer lays notebooks out with indent=1, sorted keys and lists of lines.
    path.write_text(json.dumps(document, indent=indent, ensure_ascii=False) + "\n", encoding="utf-8")
    return path


def _check(*args: str):
    return CliRunner().invoke(main, ["check", "--jobs", "1", *args])


def _demo_notebook(path: Path) -> Path:
    return _write(path, _notebook(
        _cell("# Damaged parcels", "markdown", 0),
        _cell(["%matplotlib inline\n", "import pandas as pd\n", "scans = pd.read_parquet('data/parcel_scans.parquet')"], number=1),
        _cell(CHAIN.splitlines(keepends=True), number=2),
        _cell(["!ls data\n", "x = scans[scans.parcel_size == 'XXL']\n", "x = x[x.attempts >= 3]\n", "scans.describe?"], number=3),
    ))


def test_check_locates_findings_in_cells(project: Path) -> None:
    _demo_notebook(project / "tour.ipynb")
    result = _check("tour.ipynb")
    assert result.exit_code == 1, result.output
    lines = result.stdout.splitlines()
    # The line counts within the cell; the cell is named first in the message (GNU form kept).
    assert lines[0].startswith("tour.ipynb:2:5: reorder: cell 3: would run about ")
    assert lines[1].startswith("tour.ipynb:2:10: never-matches: cell 4: `parcel_size` never holds 'XXL'")
    records = json.loads(_check("--format", "json", "tour.ipynb").stdout)["findings"]
    assert [(r["cell"], r["line"], r["column"]) for r in records] == [
        ({"number": 3, "id": "cell-2"}, 2, 5), ({"number": 4, "id": "cell-3"}, 2, 10)
    ]


def test_cells_are_one_module_in_cell_order(project: Path) -> None:
    # The frame's read in cell 2 binds the chain of cell 3 to the profile of that file.
    _demo_notebook(project / "tour.ipynb")
    (chain, _) = json.loads(CliRunner().invoke(main, ["explain", "--format", "json", "tour.ipynb"]).stdout)["chains"]
    assert chain["binding"] == {"profile": "parcel_scans", "how": "source"}
    assert chain["cell"]["number"] == 3 and [s["line"] for s in chain["steps"]] == [3, 4]


def test_a_statement_run_never_spans_two_cells(project: Path) -> None:
    _write(project / "runs.ipynb", _notebook(
        _cell("x = scans[scans.weight_kg > 0.5]\n", number=0),
        _cell("x = x[x.status == 'damaged']\n", number=1),
    ))
    assert json.loads(CliRunner().invoke(main, ["explain", "--format", "json", "runs.ipynb"]).stdout)["chains"] == []


def test_ipython_syntax_is_masked_without_moving_positions(project: Path) -> None:
    source = (
        "%load_ext autoreload\n"
        "files = !ls data\n"
        "if True:\n"
        "    %time out = scans[scans.a > 1].query('b == 2')\n"
        "    out = scans.query('c == 3')[lambda d: d.e > 1]\n"
        "scans?\n"
        "??scans\n"
    )
    _write(project / "magic.ipynb", _notebook(
        _cell(source, number=0),
        _cell("%%bash\nls | wc -l\n", number=1),
        _cell("%%timeit\nscans.query('f == 1').query('g == 2')\n", number=2),
    ))
    chains = json.loads(CliRunner().invoke(main, ["explain", "--format", "json", "magic.ipynb"]).stdout)["chains"]
    found = [(c["cell"]["number"], c["line"], c["column"]) for c in chains]
    # `%time` before a statement: the statement is still analysed.
    assert found == [(1, 4, 17), (1, 5, 11), (3, 2, 1)]
    cell_lines = source.splitlines()
    assert cell_lines[3][16:].startswith("scans[scans.a > 1]") and cell_lines[4][10:].startswith("scans.query('c == 3')")


def test_a_cell_that_does_not_parse_is_located_and_the_rest_goes_on(project: Path) -> None:
    _write(project / "broken.ipynb", _notebook(
        _cell("x = 1\n", number=0),
        _cell("def broken(:\n    pass\n", number=1),
        _cell("scans.query('a == 1').query('b == 2')\n", number=2),
    ))
    result = _check("--format", "json", "broken.ipynb")
    assert result.exit_code == 2
    (error,) = json.loads(result.stdout)["errors"]
    assert (error["cell"]["number"], error["line"], error["column"]) == (2, 1, 12) and "syntax" in error["message"]
    chains = json.loads(CliRunner().invoke(main, ["explain", "--format", "json", "broken.ipynb"]).stdout)["chains"]
    assert [c["cell"]["number"] for c in chains] == [3]
    text = _check("broken.ipynb")
    assert "broken.ipynb:1:12: error: cell 2: syntax error" in text.output


def test_not_a_notebook_and_other_languages(project: Path) -> None:
    (project / "bad.ipynb").write_text('{"cells": [\n  1,,\n]}', encoding="utf-8")
    other = _notebook(_cell("x <- scans[scans$a > 1, ]\n"))
    other["metadata"] = {"kernelspec": {"name": "ir", "language": "R", "display_name": "R"}}
    _write(project / "r.ipynb", other)
    result = _check("--format", "json", ".")
    assert result.exit_code == 2
    (error,) = json.loads(result.stdout)["errors"]
    assert error["path"] == "bad.ipynb" and (error["line"], error["column"]) == (2, 5) and error["cell"] is None


def test_discovery_finds_notebooks_but_not_checkpoints(project: Path) -> None:
    _demo_notebook(project / "nb" / "tour.ipynb") if (project / "nb").mkdir() is None else None
    (project / "nb" / ".ipynb_checkpoints").mkdir()
    _demo_notebook(project / "nb" / ".ipynb_checkpoints" / "tour-checkpoint.ipynb")
    result = _check("nb")
    assert "2 chains in 1 file" in result.output


def test_sarif_names_the_cell_and_validates(project: Path) -> None:
    _demo_notebook(project / "tour.ipynb")
    log = json.loads(_check("--format", "sarif", "tour.ipynb").stdout)
    if SCHEMA.is_file():
        import jsonschema

        # The official SARIF 2.1.0 schema (OASIS), shipped beside the repository.
        jsonschema.Draft4Validator(json.loads(SCHEMA.read_text(encoding="utf-8"))).validate(log)
    first = log["runs"][0]["results"][0]
    location = first["locations"][0]
    assert location["logicalLocations"][0]["name"] == "cell 3"
    assert location["properties"] == {"cell": 3, "cellId": "cell-2"}
    assert location["physicalLocation"]["region"]["startLine"] == 2
    assert "fixes" not in first


def _frame(rows: int = 4000) -> pd.DataFrame:
    sys.path.insert(0, str(DEMO))
    try:
        from make_parcels import make_parcels
    finally:
        sys.path.remove(str(DEMO))
    return make_parcels(rows)


def test_fix_changes_only_the_cell_source_and_validates(project: Path) -> None:
    path = _demo_notebook(project / "tour.ipynb")
    document = json.loads(path.read_text(encoding="utf-8"))
    document["cells"][2]["outputs"] = [{"output_type": "stream", "name": "stdout", "text": ["ok\n"]}]
    document["cells"][2]["metadata"] = {"tags": ["report"], "zeta": 1, "alpha": 2}
    original = _write(path, document).read_text(encoding="utf-8")
    diff = _check("--diff", "tour.ipynb")
    assert diff.exit_code == 1 and diff.stdout.startswith("--- a/tour.ipynb\n+++ b/tour.ipynb\n")
    fused = "    \"    .loc[lambda d: (d.weight_kg > 0.5) & (d.status == 'damaged')]\\n\",\n"
    assert "-    \"    .loc[lambda d: d.status == 'damaged']\\n\",\n" in diff.stdout and "+" + fused in diff.stdout
    result = _check("--fix", "tour.ipynb")
    assert "tour.ipynb:2:5: fixed: reorder: cell 3: now runs as one mask of steps 1 and 2" in result.stdout
    new = path.read_text(encoding="utf-8")
    nbformat.validate(nbformat.reads(new, as_version=nbformat.NO_CONVERT))
    # Byte for byte: only the two lines of cell 3's source fused into one changed.
    removed = [line for line in original.splitlines() if line not in new.splitlines()]
    added = [line for line in new.splitlines() if line not in original.splitlines()]
    assert len(original.splitlines()) == len(new.splitlines()) + 1 and len(removed) == 2 and len(added) == 1
    assert all(line.strip().startswith('"    .loc') for line in removed + added)
    before, after = json.loads(original), json.loads(new)
    source = "".join(after["cells"][2]["source"])
    before["cells"][2]["source"] = after["cells"][2]["source"]
    assert before == after
    # pandas: the rewritten cell gives the same frame as the written one.
    frame = _frame()
    results = []
    for text in (CHAIN, source):
        scope = {"scans": frame}
        exec(text.replace("late.head()", ""), scope)
        results.append(scope["late"])
    pd.testing.assert_frame_equal(results[0], results[1])
    assert len(results[0]) > 0
    assert _check("--fix", "tour.ipynb").stdout.count("fixed:") == 0


def test_fix_keeps_another_layout_byte_for_byte(project: Path) -> None:
    # Two-space indent, unsorted keys, a single-string source, no trailing newline.
    document = _notebook(_cell("import pandas as pd\nscans = pd.read_parquet('data/parcel_scans.parquet')", number=0), _cell(CHAIN, number=1))
    document["cells"][1] = {"source": CHAIN, "outputs": [], "cell_type": "code", "metadata": {}, "execution_count": 3, "id": "b"}
    text = json.dumps(document, indent=2, ensure_ascii=False)
    path = project / "style.ipynb"
    path.write_text(text, encoding="utf-8")
    assert _check("--fix", "style.ipynb").exit_code == 0
    new = path.read_text(encoding="utf-8")
    expected = text.replace(json.dumps(CHAIN), json.dumps(CHAIN.replace(
        "    .loc[lambda d: d.weight_kg > 0.5]\n    .loc[lambda d: d.status == 'damaged']",
        "    .loc[lambda d: (d.weight_kg > 0.5) & (d.status == 'damaged')]",
    )))
    assert new == expected and expected != text


def test_fix_leaves_a_notebook_that_changed_on_disk(project: Path) -> None:
    path = _demo_notebook(project / "tour.ipynb")
    from chainlint.engine.check import check
    from chainlint.engine.options import Options
    from chainlint.engine.run import analyse_files
    from chainlint.rewrite.fixes import attach_fixes

    results = analyse_files([str(path)], jobs=1)
    found = check(results, Options(store=project / ".chainlint"))
    path.write_text(path.read_text(encoding="utf-8").replace("import pandas", "import  pandas"), encoding="utf-8")
    findings, files = attach_fixes(found.findings, results)
    assert all(f.fix is None for f in findings if f.rule == "reorder")
    assert "changed on disk" in files[str(path)].error


def test_explain_locates_the_conjuncts_of_a_written_mask_in_their_cell(tmp_path: Path) -> None:
    path = _write(tmp_path / "mask.ipynb", _notebook(
        _cell(["import pandas as pd\n", "scans = pd.read_parquet('s.parquet')"], number=0),
        _cell(["x = 1\n", "late = scans[(scans.weight_kg > 0.5) & (scans.status == 'damaged')]"], number=1),
    ))
    document = json.loads(CliRunner().invoke(main, ["explain", "--format", "json", str(path)]).output)
    (chain,) = document["chains"]
    assert chain["form"] == "mask" and chain["cell"]["number"] == 2
    line = "late = scans[(scans.weight_kg > 0.5) & (scans.status == 'damaged')]"
    texts = [line[s["conjunct"]["column"] - 1 : s["conjunct"]["end_column"] - 1] for s in chain["steps"]]
    assert [s["conjunct"]["line"] for s in chain["steps"]] == [2, 2]
    assert texts == ["scans.weight_kg > 0.5", "scans.status == 'damaged'"]
