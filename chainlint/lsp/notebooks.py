"""Notebook documents (LSP 3.17): diagnostics and quick fixes per cell.

The client sends a notebook's cells (`notebookDocument/didOpen`, `didChange`); its code cells
are analysed together, in cell order, as one module, exactly as `check` reads an `.ipynb`
(IPython syntax masked in place, statement runs kept within a cell), and every finding is
published on its own cell's URI, in that cell's lines. A quick fix is the verified rewrite of
the notebook's analysed text, mapped into the one cell it changes.
"""

from __future__ import annotations

import logging
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from urllib.parse import unquote, urlparse

from lsprotocol import types

from chainlint.engine.check import PlannedChain, check
from chainlint.engine.options import Options
from chainlint.engine.run import analyse_notebook
from chainlint.estimate.stores import LoadedStores
from chainlint.lsp.protocol import severity
from chainlint.model import Edit, Finding, Span
from chainlint.parse.notebooks import notebook_from_cells
from chainlint.parse.source import SourceText
from chainlint.engine.fixes import fix_finding
from chainlint.lsp.fixes import fix_title

logger = logging.getLogger("chainlint.lsp")

#: Every notebook type, its Python cells (`*` matches every notebook, as LSP 3.17 says).
SYNC = types.NotebookDocumentSyncOptions(
    notebook_selector=[types.NotebookDocumentFilterWithCells(cells=[types.NotebookCellLanguage(language="python")], notebook="*")],
)


@dataclass(frozen=True)
class CellState:
    """One code cell's share of its notebook's analysis. Chains and findings keep the
    positions of the notebook's analysed text (`source`); `first_line` is where the cell starts
    there, `lines` the cell's own text (positions sent to the client are counted in it)."""

    notebook: str
    source: SourceText
    first_line: int
    lines: tuple[str, ...]
    planned: tuple[PlannedChain, ...]
    findings: tuple[Finding, ...]

    def local(self, span: Span) -> Span:
        shift = self.first_line - 1
        return Span(span.line - shift, span.column, span.end_line - shift, span.end_column)

    def analysed(self, line: int, column: int) -> tuple[int, int]:
        return line + self.first_line - 1, column


def code_cells(ls, notebook: types.NotebookDocument) -> list[tuple[int, str, str]]:  # type: ignore[no-untyped-def]
    """(index among all cells, cell URI, text) of the notebook's Python code cells."""
    cells = []
    for index, cell in enumerate(notebook.cells):
        if cell.kind != types.NotebookCellKind.Code:
            continue
        document = ls.workspace.get_text_document(cell.document)
        if document.language_id not in (None, "python"):
            continue
        cells.append((index, cell.document, document.source))
    return cells


def analyse_cells(notebook_uri: str, path: str, cells: Sequence[tuple[int, str, str]], options: Options,
                  stores: LoadedStores | None = None) -> dict[str, CellState]:
    """Each code cell's state, by cell URI (every cell given has one, with or without findings)."""
    book = notebook_from_cells(path, [(index, None, text) for index, _, text in cells])
    result = check([analyse_notebook(book)], options, stores=stores)
    uris = {index: uri for index, uri, _ in cells}
    states: dict[str, CellState] = {}
    for cell in book.cells:
        inside = range(cell.first_line, cell.first_line + cell.line_count)
        states[uris[cell.index]] = CellState(
            notebook_uri,
            book.source,
            cell.first_line,
            tuple(cell.text.splitlines(keepends=True)) or ("",),
            tuple(p for p in result.chains if p.chain.span.line in inside),
            tuple(f for f in result.findings if f.span.line in inside),
        )
    return states


def cell_fix(state: CellState, finding: Finding) -> Edit | None:
    """The verified rewrite of the finding's chain, as an edit of the cell's own text (cell
    positions), or None when there is none."""
    chain = next((p.chain for p in state.planned if p.chain.span == finding.span), None)
    edit = None if chain is None else fix_finding(state.source, chain, finding).fix
    if edit is None:
        return None
    span = state.local(edit.span)
    if span.line < 1 or span.end_line > len(state.lines):
        return None
    return Edit(edit.start, edit.end, edit.text, span)


# -- the server's side -------------------------------------------------------------------------

class Notebooks:
    """The last analysis of each open notebook, by cell URI, the cells each notebook had, and
    the profile stores read for them (read again only when their files change)."""

    def __init__(self) -> None:
        self.cells: dict[str, CellState] = {}
        self.published: dict[str, list[str]] = {}
        self.stores = LoadedStores()


def _range(ls, lines: Sequence[str], span: Span) -> types.Range:  # type: ignore[no-untyped-def]
    internal = types.Range(
        start=types.Position(line=span.line - 1, character=span.column - 1),
        end=types.Position(line=span.end_line - 1, character=span.end_column - 1),
    )
    return ls.workspace.position_codec.range_to_client_units(list(lines), internal)


def _path(uri: str) -> str:
    parsed = urlparse(uri)
    return unquote(parsed.path) if parsed.scheme == "file" else unquote(parsed.path or uri)


def refresh(ls, uri: str, options_for: Callable[[str], Options]) -> None:  # type: ignore[no-untyped-def]
    """Analyse the notebook again and publish every code cell's diagnostics (an empty list
    clears a cell's old ones, and those of cells that left the notebook)."""
    notebook = ls.workspace.get_notebook_document(notebook_uri=uri)
    if notebook is None:
        return
    path = _path(uri)
    store: Notebooks = ls.notebooks
    try:
        states = analyse_cells(uri, path, code_cells(ls, notebook), options_for(path), store.stores)
    except Exception:  # noqa: BLE001 - one bad notebook must not stop the server
        logger.exception("analysis of %s failed", uri)
        return
    for cell_uri in store.published.get(uri, []):
        store.cells.pop(cell_uri, None)
        if cell_uri not in states:
            ls.text_document_publish_diagnostics(types.PublishDiagnosticsParams(uri=cell_uri, diagnostics=[]))
    store.cells.update(states)
    store.published[uri] = list(states)
    for cell_uri, state in states.items():
        found = [
            types.Diagnostic(range=_range(ls, state.lines, state.local(f.span)), message=f.message, code=f.rule,
                             severity=severity(f.rule), source="chainlint")
            for f in state.findings
        ]
        ls.text_document_publish_diagnostics(types.PublishDiagnosticsParams(uri=cell_uri, diagnostics=found))


def close(ls, uri: str) -> None:  # type: ignore[no-untyped-def]
    store: Notebooks = ls.notebooks
    for cell_uri in store.published.pop(uri, []):
        store.cells.pop(cell_uri, None)
        ls.text_document_publish_diagnostics(types.PublishDiagnosticsParams(uri=cell_uri, diagnostics=[]))


def code_actions(ls, params: types.CodeActionParams) -> list[types.CodeAction]:  # type: ignore[no-untyped-def]
    """Quick fixes for a cell: the planned order of each `reorder` chain the range touches."""
    state: CellState = ls.notebooks.cells[params.text_document.uri]
    internal = [ls.workspace.position_codec.position_from_client_units(list(state.lines), p)
                for p in (params.range.start, params.range.end)]
    start, end = ((p.line + 1, p.character + 1) for p in internal)
    actions = []
    for finding in state.findings:
        span = state.local(finding.span)
        if finding.groups is None or (span.end_line, span.end_column) < start or end < (span.line, span.column):
            continue
        edit = cell_fix(state, finding)
        if edit is None:
            continue
        text_edit = types.TextEdit(range=_range(ls, state.lines, edit.span), new_text=edit.text)
        actions.append(types.CodeAction(
            title=fix_title(finding.groups),
            kind=types.CodeActionKind.QuickFix,
            diagnostics=[d for d in params.context.diagnostics if d.code == finding.rule],
            edit=types.WorkspaceEdit(changes={params.text_document.uri: [text_edit]}),
            is_preferred=True,
        ))
    return actions


def register(server, options_for: Callable[[str], Options]) -> None:  # type: ignore[no-untyped-def]
    """The notebook handlers; pygls keeps the notebook's cells in its workspace first."""
    server.notebooks = Notebooks()

    @server.feature(types.NOTEBOOK_DOCUMENT_DID_OPEN)
    def did_open(ls, params: types.DidOpenNotebookDocumentParams) -> None:  # type: ignore[no-untyped-def]
        refresh(ls, params.notebook_document.uri, options_for)

    @server.feature(types.NOTEBOOK_DOCUMENT_DID_CHANGE)
    def did_change(ls, params: types.DidChangeNotebookDocumentParams) -> None:  # type: ignore[no-untyped-def]
        refresh(ls, params.notebook_document.uri, options_for)

    @server.feature(types.NOTEBOOK_DOCUMENT_DID_SAVE)
    def did_save(ls, params: types.DidSaveNotebookDocumentParams) -> None:  # type: ignore[no-untyped-def]
        refresh(ls, params.notebook_document.uri, options_for)

    @server.feature(types.NOTEBOOK_DOCUMENT_DID_CLOSE)
    def did_close(ls, params: types.DidCloseNotebookDocumentParams) -> None:  # type: ignore[no-untyped-def]
        close(ls, params.notebook_document.uri)


def hovered(ls, params: types.HoverParams) -> PlannedChain | None:  # type: ignore[no-untyped-def]
    """The chain of the cell under the cursor, for the hover's plan."""
    state: CellState = ls.notebooks.cells[params.text_document.uri]
    internal = ls.workspace.position_codec.position_from_client_units(list(state.lines), params.position)
    at = (internal.line + 1, internal.character + 1)
    for item in state.planned:
        span = state.local(item.chain.span)
        if (span.line, span.column) <= at <= (span.end_line, span.end_column):
            return item
    return None
