"""`check --format sarif`: a SARIF 2.1.0 log (OASIS standard) for code-scanning services.

Locations are relative URIs under the base id `SRCROOT` (the folder chainlint ran in); columns
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

from chainlint.analysis.check import CheckResult
from chainlint.model import Cell, Finding, Span
from chainlint.report.escape import encodable
from chainlint.rules import CATALOG, LEVELS
from chainlint.version import __version__

SCHEMA = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
BASE = "SRCROOT"


def _uri(path: str) -> str:
    """The path's own bytes, percent-encoded (RFC 3986): exact for any name the file system holds."""
    relative = os.path.relpath(path)
    return quote(os.fsencode(relative.replace(os.sep, "/")))


def _region(span: Span) -> dict[str, int]:
    return {"startLine": span.line, "startColumn": span.column, "endLine": span.end_line, "endColumn": span.end_column}


def _location(path: str, span: Span, cell: Cell | None = None) -> dict[str, Any]:
    location: dict[str, Any] = {
        "physicalLocation": {"artifactLocation": {"uri": _uri(path), "uriBaseId": BASE}, "region": _region(span)}
    }
    if cell is not None:
        name = f"cell {cell.number}"
        location["logicalLocations"] = [{"name": name, "fullyQualifiedName": f"{_uri(path)}#cell={cell.number}", "kind": "module"}]
        location["properties"] = {"cell": cell.number, "cellId": cell.id}
    return location


def _result(finding: Finding, index: dict[str, int], levels: dict[str, str]) -> dict[str, Any]:
    result: dict[str, Any] = {
        "ruleId": finding.rule,
        "ruleIndex": index[finding.rule],
        "level": levels[finding.rule],
        "message": {"text": finding.message},
        "locations": [_location(finding.path, finding.span, finding.cell)],
    }
    if finding.fix is not None and finding.cell is None:
        result["fixes"] = [{
            "description": {"text": "put the chain's steps into the planned order"},
            "artifactChanges": [{
                "artifactLocation": {"uri": _uri(finding.path), "uriBaseId": BASE},
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
    modules = [module for module in CATALOG if module.NAME in rules or any(f.rule == module.NAME for f in result.findings)]
    index = {module.NAME: number for number, module in enumerate(modules)}
    driver = {
        "name": "chainlint",
        "version": __version__,
        "rules": [
            {
                "id": module.NAME,
                "name": "".join(part.capitalize() for part in module.NAME.split("-")),
                "shortDescription": {"text": module.SUMMARY},
                "fullDescription": {"text": module.DESCRIPTION},
                "help": {"text": module.HELP},
                "defaultConfiguration": {"level": LEVELS[module.NAME]},
            }
            for module in modules
        ],
    }
    notifications = [
        {"level": "error", "message": {"text": error.message}, "locations": [_location(error.path, Span(error.line, error.column, error.line, error.column + 1), error.cell)]}
        for error in sorted(result.errors, key=lambda e: (e.path, e.line, e.column))
    ]
    run = {
        "tool": {"driver": driver},
        "originalUriBaseIds": {BASE: {"uri": Path.cwd().resolve().as_uri() + "/"}},
        "columnKind": "unicodeCodePoints",
        "results": [_result(f, index, LEVELS) for f in result.findings],
        "invocations": [{"executionSuccessful": not result.errors, "toolExecutionNotifications": notifications}],
    }
    return json.dumps(encodable({"$schema": SCHEMA, "version": "2.1.0", "runs": [run]}), indent=2, ensure_ascii=False) + "\n"
