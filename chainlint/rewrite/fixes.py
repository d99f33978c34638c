"""Attach a verified edit to every `reorder` finding, and write the edits safely.

Writing: the file is read again and must be the text that was analysed; the new text, in the
original's encoding (BOM and coding cookie included) and newline style, goes through
`chainlint.writer` (atomic replace keeping owner, mode and extended attributes; links written
through; a last check for edits right before the rename). If the file changed on disk
meanwhile, or any check fails, nothing is written and the reason is given.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass, replace

from chainlint.model import Chain, Edit, FileAnalysis, Finding
from chainlint.parse.notebooks import is_notebook, notebook_from_text
from chainlint.parse.source import SourceError, SourceText, decode_source, read_source, text_digest, text_source
from chainlint.rewrite.cells import rewrite_cells
from chainlint.rewrite.permute import RewriteError, apply_edits
from chainlint.rewrite.plans import plan_edits
from chainlint.rewrite.verify import verify
from chainlint.writer import WriteError, read_snapshot, write_file


@dataclass(frozen=True)
class FileFix:
    """The rewrite of one file: its old and new text, or why it cannot be rewritten; `edits`
    made the new text from the old (none known when a notebook's cells were written back)."""

    path: str
    source: SourceText | None
    new_text: str | None
    error: str | None = None
    edits: tuple[Edit, ...] | None = None


def attach_fixes(findings: Sequence[Finding], results: Sequence[FileAnalysis]) -> tuple[list[Finding], dict[str, FileFix]]:
    """Findings with their `fix` (or `fix_error`), and the rewrite of each file concerned: every
    finding that proposes an order, in the file read again (it must still be the text analysed)."""
    digests = {r.path: r.digest for r in results}
    # By the whole span: a chain may start where another one does (`s[a][b].f()[c][d]`).
    chains = {(c.path, c.span): c for r in results for c in r.chains}
    by_file: dict[str, list[Finding]] = defaultdict(list)
    for finding in findings:
        if finding.groups is not None:
            by_file[finding.path].append(finding)
    updated: dict[int, Finding] = {}
    files: dict[str, FileFix] = {}
    for path, reorders in by_file.items():
        notebook = None
        try:
            source = read_source(path)
            if is_notebook(path):
                # A notebook is rewritten in its analysed text, then back into its cells.
                notebook = notebook_from_text(path, source.text)
                source = notebook.source
        except SourceError as error:
            source, refusal = None, f"cannot read it again: {error.message}"
        else:
            refusal = None if text_digest(source.text) == digests.get(path) else "the file changed on disk since it was read; left alone"
        if refusal is not None:
            files[path] = FileFix(path, source, None, refusal)
            for finding in reorders:
                updated[id(finding)] = replace(finding, fix_error=refusal)
            continue
        assert source is not None
        fixed, edits = fix_text(source, [(finding, chains[(path, finding.span)]) for finding in reorders])
        updated.update((id(before), after) for before, after in zip(reorders, fixed))
        if edits and notebook is not None:
            try:
                files[path] = FileFix(path, text_source(path, notebook.file_text), rewrite_cells(notebook, edits))
            except RewriteError as error:
                for before, after in zip(reorders, fixed):
                    if after.fix is not None:
                        updated[id(before)] = replace(after, fix=None, fix_error=str(error))
        elif edits:
            files[path] = FileFix(path, source, apply_edits(source.text, edits), edits=tuple(edits))
    return [updated.get(id(f), f) for f in findings], files


def fix_text(source: SourceText, reorders: Sequence[tuple[Finding, Chain]]) -> tuple[list[Finding], list[Edit]]:
    """Each finding with its verified edit of `source` as `fix`, or why there is none as
    `fix_error`; and the edits accepted, which pass verification together. The one way a fix is
    made, for a file (`check --fix`, `--diff`) and for an editor's text (a quick fix)."""
    updated: dict[int, Finding] = {}
    prepared: list[tuple[Finding, Chain, Edit]] = []
    edits = plan_edits(source, [(chain, finding.groups) for finding, chain in reorders])  # type: ignore[misc]
    for (finding, chain), edit in zip(reorders, edits):
        if isinstance(edit, RewriteError):
            updated[id(finding)] = replace(finding, fix_error=str(edit))
        else:
            prepared.append((finding, chain, edit))
    prepared = _apart(prepared, updated)
    # One verification of the whole text; only when it fails are the edits tried in halves,
    # down to each bad edit alone, to keep the good ones and say which chain could not be
    # rewritten (a failing edit costs a verification per halving, not one per edit).
    accepted = _verified(source, prepared)
    if len(accepted) < len(prepared):
        good = _passing(source, prepared, updated)
        # Edits that pass in their parts must still pass together.
        accepted = _verified(source, good, updated)
    for finding, _, edit in accepted:
        updated[id(finding)] = replace(finding, fix=edit)
    return [updated.get(id(finding), finding) for finding, _ in reorders], [edit for _, _, edit in accepted]


def _apart(items: list[tuple[Finding, Chain, Edit]], refusals: dict[int, Finding]) -> list[tuple[Finding, Chain, Edit]]:
    """The edits that do not overlap an earlier one; a chain nested in another's rewritten
    text waits for the next run (noting so), instead of spoiling every fix of the file."""
    kept: list[tuple[Finding, Chain, Edit]] = []
    for item in sorted(items, key=lambda item: (item[2].start, -item[2].end)):
        # The kept edits are apart and by start: only the last one can reach this one.
        holder = kept[-1] if kept and item[2].start < kept[-1][2].end and kept[-1][2].start < item[2].end else None
        if holder is None:
            kept.append(item)
        else:
            refusals[id(item[0])] = replace(item[0], fix_error=(
                f"overlaps the rewrite of the chain at line {holder[1].span.line}; run --fix again to rewrite it"))
    return kept


def _passing(source: SourceText, items: list[tuple[Finding, Chain, Edit]],
             refusals: dict[int, Finding]) -> list[tuple[Finding, Chain, Edit]]:
    """Of `items`, which failed verification together, those in halves that pass, halving down
    to each edit that fails alone (noting why)."""
    if len(items) == 1:
        return _verified(source, items, refusals)
    half = len(items) // 2
    kept: list[tuple[Finding, Chain, Edit]] = []
    for part in (items[:half], items[half:]):
        kept += _verified(source, part, refusals if len(part) == 1 else None) or (_passing(source, part, refusals) if len(part) > 1 else [])
    return kept


def _verified(source: SourceText, items: list[tuple[Finding, Chain, Edit]],
              refusals: dict[int, Finding] | None = None) -> list[tuple[Finding, Chain, Edit]]:
    """`items` when their edits together pass verification, else none (noting why)."""
    if not items:
        return []
    try:
        verify(source, apply_edits(source.text, [edit for _, _, edit in items]), [(chain, f.groups) for f, chain, _ in items])  # type: ignore[misc]
    except RewriteError as error:
        if refusals is not None:
            for finding, _, _ in items:
                refusals[id(finding)] = replace(finding, fix_error=str(error))
        return []
    return items


def write_fix(fix: FileFix) -> str | None:
    """Write one file's rewrite through chainlint's writer; the reason when it was not written.

    The file is read again and must still be the text analysed; the writer checks it once more
    right before its atomic rename, so an edit saved meanwhile is never overwritten.
    """
    assert fix.source is not None and fix.new_text is not None
    try:
        data, snapshot = read_snapshot(fix.path)
        current = decode_source(fix.path, data)
    except OSError as error:
        return f"cannot read it again: {error.strerror or error}"
    except SourceError as error:
        return f"cannot read it again: {error.message}"
    if current.text != fix.source.text:
        return "the file changed on disk since it was read; left alone"
    try:
        write_file(fix.path, fix.new_text.encode(fix.source.encoding), expected=snapshot)
    except WriteError as error:
        return error.reason
    return None
