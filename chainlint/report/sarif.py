"""`check --format sarif`: a SARIF 2.1.0 log (OASIS standard) for code-scanning services.

Locations are relative URIs under the base id `SRCROOT` (the run's root folder: where chainlint ran); columns
count Unicode code points (`columnKind` says so) and end columns point one past the last
character, as SARIF regions do. A `reorder` finding carries its rewrite as a SARIF fix.

In a notebook the region's lines count within the cell, which the location names as a logical
location (`cell N`, kind `module`, its fully qualified name `path#cell=N`) and in its
properties (`cell`, `cellId`). A notebook finding carries no SARIF fix: its regions are not
places in the file's own JSON text, so a consumer could not apply it (`check --fix` can).
"""

from __future__ import annotations

import json
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any
from urllib.parse import quote

from chainlint.engine.check import CheckResult, error_order
from chainlint.model import Cell, Finding, Span
from chainlint.report.escape import encodable
from chainlint.rules import LEVELS, RULES
from chainlint.version import __version__

SCHEMA = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
BASE = "SRCROOT"


def _uri(path: str, root: Path) -> str:
    """The path's own bytes relative to `root`, percent-encoded (RFC 3986): exact for any name
    the file system holds."""
    relative = os.path.relpath(path, root)
    return quote(os.fsencode(relative.replace(os.sep, "/")))


def _region(span: Span) -> dict[str, int]:
    return {"startLine": span.line, "startColumn": span.column, "endLine": span.end_line, "endColumn": span.end_column}


def _location(path: str, span: Span, root: Path, cell: Cell | None = None) -> dict[str, Any]:
    location: dict[str, Any] = {
        "physicalLocation": {"artifactLocation": {"uri": _uri(path, root), "uriBaseId": BASE}, "region": _region(span)}
    }
    if cell is not None:
        name = f"cell {cell.number}"
        location["logicalLocations"] = [{"name": name, "fullyQualifiedName": f"{_uri(path, root)}#cell={cell.number}", "kind": "module"}]
        location["properties"] = {"cell": cell.number, "cellId": cell.id}
    return location


def _result(finding: Finding, index: dict[str, int], root: Path) -> dict[str, Any]:
    result: dict[str, Any] = {
        "ruleId": finding.rule,
        "ruleIndex": index[finding.rule],
        "level": LEVELS[finding.rule],
        "message": {"text": finding.message},
        "locations": [_location(finding.path, finding.span, root, finding.cell)],
    }
    if finding.fix is not None and finding.cell is None:
        result["fixes"] = [{
            "description": {"text": "put the chain's steps into the planned order"},
            "artifactChanges": [{
                "artifactLocation": {"uri": _uri(finding.path, root), "uriBaseId": BASE},
                "replacements": [{"deletedRegion": _region(finding.fix.span), "insertedContent": {"text": finding.fix.text}}],
            }],
        }]
    if finding.speedup is not None:
        result["properties"] = {
            "speedup": round(finding.speedup, 4),
            "currentSeconds": round(finding.current_seconds or 0.0, 6),
            "plannedSeconds": round(finding.planned_seconds or 0.0, 6),
            "order": list(finding.order or ()),
            "groups": [list(g) for g in finding.groups or ()],
        }
    return result


def check_sarif(result: CheckResult, rules: Sequence[str]) -> str:
    """The log of a check; locations relative to the run's root folder."""
    root = result.root
    listed = [rule for rule in RULES if rule.name in rules or any(f.rule == rule.name for f in result.findings)]
    index = {rule.name: number for number, rule in enumerate(listed)}
    driver = {
        "name": "chainlint",
        "version": __version__,
        "rules": [
            {
                "id": rule.name,
                "name": "".join(part.capitalize() for part in rule.name.split("-")),
                "shortDescription": {"text": rule.summary},
                "fullDescription": {"text": rule.description},
                "help": {"text": rule.help},
                "defaultConfiguration": {"level": rule.level},
            }
            for rule in listed
        ],
    }
    notifications = [
        {"level": "error", "message": {"text": error.message}, "locations": [_location(error.path, Span(error.line, error.column, error.line, error.column + 1), root, error.cell)]}
        for error in sorted(result.errors, key=error_order)
    ]
    run = {
        "tool": {"driver": driver},
        "originalUriBaseIds": {BASE: {"uri": root.resolve().as_uri() + "/"}},
        "columnKind": "unicodeCodePoints",
        "results": [_result(f, index, root) for f in result.findings],
        "invocations": [{"executionSuccessful": not result.errors, "toolExecutionNotifications": notifications}],
    }
    return json.dumps(encodable({"$schema": SCHEMA, "version": "2.1.0", "runs": [run]}), indent=2, ensure_ascii=False) + "\n"
