"""Fixes, one way for every front end: the verified rewrite of each finding that proposes an
order (`rewrite.fixes.fix_text`), attached to the finding, for files (`check --fix`, `--diff`)
and for an editor's text (a quick fix). The rewriter, and libcst with it, loads only when there
is a fix to make."""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

from chainlint.engine.check import CheckResult
from chainlint.model import Chain, FileAnalysis, Finding
from chainlint.parse.source import SourceText
from chainlint.writer import remove_stale_temporaries

if TYPE_CHECKING:
    from chainlint.rewrite.fixes import FileFix


@dataclass(frozen=True)
class Written:
    """What `write_fixes` did: the paths rewritten, and (path, why) for those left alone."""

    paths: frozenset[str]
    refused: tuple[tuple[str, str], ...]

    def fixed(self, finding: Finding) -> bool:
        """Whether the finding's fix is now in its file."""
        return finding.fix is not None and finding.path in self.paths


def attach_fixes(result: CheckResult, analyses: Sequence[FileAnalysis]) -> tuple[CheckResult, dict[str, FileFix]]:
    """The result with every fix (or why there is none) attached, and each file's rewrite."""
    if not any(finding.groups is not None for finding in result.findings):
        return result, {}
    from chainlint.rewrite.fixes import attach_fixes as attach

    findings, files = attach(result.findings, analyses)
    return replace(result, findings=tuple(findings)), files


def fix_finding(source: SourceText, chain: Chain, finding: Finding) -> Finding:
    """The finding with the verified rewrite of its chain in `source` as `fix` (or why there is
    none as `fix_error`); a finding that proposes no plan comes back as it is."""
    if finding.groups is None:
        return finding
    from chainlint.rewrite.fixes import fix_text

    (fixed,), _ = fix_text(source, [(finding, chain)])
    return fixed


def write_fixes(files: dict[str, FileFix], analysed: Sequence[str]) -> Written:
    """Write every file that has a verified rewrite. Temporaries a killed run left beside any
    analysed file go first, whether or not it is rewritten this time."""
    for folder in sorted({os.path.dirname(os.path.realpath(path)) for path in analysed}):
        remove_stale_temporaries(folder)
    if not files:
        return Written(frozenset(), ())
    from chainlint.rewrite.fixes import write_fix

    written: set[str] = set()
    refused: list[tuple[str, str]] = []
    done: dict[str, str] = {}  # the real file -> the new text already written to it
    for path in sorted(files):
        fix = files[path]
        real = os.path.realpath(path)
        if fix.new_text is not None and done.get(real) == fix.new_text:
            written.add(path)  # the same file under another name (a link), rewritten already
            continue
        reason = fix.error if fix.new_text is None else write_fix(fix)
        if reason is None:
            written.add(path)
            done[real] = fix.new_text  # type: ignore[assignment]
        else:
            refused.append((path, reason))
    return Written(frozenset(written), tuple(refused))
