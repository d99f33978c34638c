"""CI front ends: SARIF validated against the official schema, --output, fail rules, and the
`[tool.chainlint]` / chainlint.toml configuration."""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

import pytest
from click.testing import CliRunner

from chainlint.cli import main

DEMO = Path(__file__).parent.parent / "examples"
# The official SARIF 2.1.0 schema (OASIS Standard with Errata 01, JSON Schema draft-04), as
# shipped beside the repository in ../shared/schemas (provenance in its SOURCES.md).
SCHEMA = Path(__file__).resolve().parent.parent.parent / "shared" / "schemas" / "sarif-schema-2.1.0.json"


def _validate(log: dict) -> None:
    if not SCHEMA.is_file():
        pytest.skip(f"the official SARIF schema is absent (expected at {SCHEMA})")
    import jsonschema

    schema = json.loads(SCHEMA.read_text(encoding="utf-8"))
    jsonschema.Draft4Validator(schema).validate(log)


def _check(*args: str):
    return CliRunner().invoke(main, ["check", "--jobs", "1", *args])


def test_sarif_log_validates_and_carries_rules_results_and_fixes(project: Path) -> None:
    result = _check("--format", "sarif", "pipeline.py")
    assert result.exit_code == 1
    log = json.loads(result.stdout)
    _validate(log)
    (run,) = log["runs"]
    assert run["columnKind"] == "unicodeCodePoints"
    rules = [rule["id"] for rule in run["tool"]["driver"]["rules"]]
    assert rules == ["reorder", "never-matches", "unknown-column", "missing-profile", "stale-joint", "joint-uncounted"]
    reorder = [r for r in run["results"] if r["ruleId"] == "reorder"]
    assert len(reorder) == 2
    location = reorder[0]["locations"][0]["physicalLocation"]
    assert location["artifactLocation"] == {"uri": "pipeline.py", "uriBaseId": "SRCROOT"}
    replacement = reorder[0]["fixes"][0]["artifactChanges"][0]["replacements"][0]
    assert replacement["insertedContent"]["text"].startswith('.loc[lambda d: d["status"] == "damaged"]')
    assert run["originalUriBaseIds"]["SRCROOT"]["uri"] == project.resolve().as_uri() + "/"


def test_sarif_with_errors_and_without_findings_validates(project: Path) -> None:
    (project / "broken.py").write_text("out = df[df.a == 1][df.b == 2]\ndef (:\n")
    (project / "clean.py").write_text("x = 1\n")
    for target, status in (("broken.py", 2), ("clean.py", 0)):
        result = _check("--format", "sarif", target, "--rule", "unbound")
        assert result.exit_code == status
        log = json.loads(result.stdout)
        _validate(log)
    notifications = json.loads(_check("--format", "sarif", "broken.py").stdout)["runs"][0]["invocations"][0]["toolExecutionNotifications"]
    assert notifications[0]["level"] == "error" and "syntax error" in notifications[0]["message"]["text"]


def test_output_file_and_summary_on_stderr(project: Path) -> None:
    result = _check("--format", "sarif", "--output", "report.sarif", "pipeline.py")
    assert result.exit_code == 1
    assert result.stdout == ""
    assert "3 findings" in result.stderr
    _validate(json.loads((project / "report.sarif").read_text()))


def test_fail_rules_decide_the_exit_status(project: Path) -> None:
    assert _check("--fail-rule", "reorder", "pipeline.py").exit_code == 1
    result = _check("--rule", "never-matches", "--fail-rule", "reorder", "pipeline.py")
    assert result.exit_code == 0 and "never-matches" in result.stdout


def test_pyproject_configuration_and_precedence(project: Path) -> None:
    (project / "pyproject.toml").write_text(
        "[tool.chainlint]\nmin_gain = 50.0\nskip = ['never-matches']\nfail_rules = ['reorder']\n"
        "[tool.chainlint.rows]\nparcel_scans = 100000000\n"
    )
    result = _check("pipeline.py")
    assert result.exit_code == 0 and "reorder" not in result.stdout and "never-matches" not in result.stdout
    overridden = _check("--min-gain", "1.25", "--format", "json", "pipeline.py")
    findings = json.loads(overridden.stdout)["findings"]
    assert [f["rule"] for f in findings] == ["reorder", "reorder"]
    assert findings[0]["message"].startswith("run `status == 'damaged'` first: ")
    assert findings[0]["message"].endswith(" at 100,000,000 rows, set in [tool.chainlint.rows])")
    shown = CliRunner().invoke(main, ["config", "pipeline.py"])
    assert shown.exit_code == 0
    assert f"min_gain = 50.0  # {project / 'pyproject.toml'}" in shown.stdout
    assert "min_saving_ms = 5.0  # default" in shown.stdout
    printed = tomllib.loads(shown.stdout)["tool"]["chainlint"]   # the standard library's TOML reader
    assert printed["min_gain"] == 50.0 and printed["rows"] == {"parcel_scans": 100_000_000}


def test_chainlint_toml_and_unknown_keys(project: Path) -> None:
    (project / "chainlint.toml").write_text("min_gian = 3\n")
    result = _check("pipeline.py")
    assert result.exit_code == 2
    assert f"{project / 'chainlint.toml'}: unknown key `min_gian`; did you mean `min_gain`?" in result.output
    (project / "chainlint.toml").write_text("rules = ['reorder']\nexclude = ['pipeline.py']\n")
    assert "no findings; 0 chains in 0 files" in _check(".").stdout
    (project / "chainlint.toml").write_text("rules = ['reoder']\n")
    assert "unknown rules: reoder" in _check(".").output
