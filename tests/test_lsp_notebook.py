"""`chainlint lsp` with notebook documents (LSP 3.17 `notebookDocument/*`), pytest-lsp acting
as a notebook client: diagnostics published per cell URI, in the cell's own lines, and the
quick fix as an edit of the one cell it changes."""

from __future__ import annotations

import asyncio
import sys
from pathlib import Path

import pytest
import pytest_lsp
from lsprotocol import types
from pytest_lsp import ClientServerConfig, LanguageClient, client_capabilities

from chainlint.rules import LEVELS

DEMO = Path(__file__).parent.parent / "examples"
TIMEOUT = 60
READ = "import pandas as pd\nscans = pd.read_parquet('data/parcel_scans.parquet')\n%time rows = len(scans)"
CHAIN = "late = (\n    scans\n    .loc[lambda d: d.weight_kg > 0.5]\n    .loc[lambda d: d.status == 'damaged']\n)"
PLANNED = "late = (\n    scans\n    .loc[lambda d: (d.weight_kg > 0.5) & (d.status == 'damaged')]\n)"


@pytest_lsp.fixture(scope="module", config=ClientServerConfig(server_command=[sys.executable, "-m", "chainlint", "lsp"]))
async def client(lsp_client: LanguageClient, demo_store: Path):
    capabilities = client_capabilities("visual-studio-code")
    # A notebook client says so (LSP 3.17 `notebookDocument.synchronization`).
    capabilities.notebook_document = types.NotebookDocumentClientCapabilities(
        synchronization=types.NotebookDocumentSyncClientCapabilities())
    result = await lsp_client.initialize_session(types.InitializeParams(capabilities=capabilities, root_uri=demo_store.as_uri()))
    assert result.capabilities.notebook_document_sync is not None
    yield
    await lsp_client.shutdown_session()


def _cell_uri(notebook: Path, number: int) -> str:
    # The form editors use: the notebook's path in a scheme of their own, the cell in the fragment.
    return f"vscode-notebook-cell:{notebook.as_posix()}#C{number}"


async def _diagnostics(client: LanguageClient, uris: list[str]) -> dict[str, list[types.Diagnostic]]:
    """Wait until every cell URI has been published since the last call, then read them."""
    for uri in uris:
        client.diagnostics.pop(uri, None)
    deadline = asyncio.get_event_loop().time() + TIMEOUT
    while any(uri not in client.diagnostics for uri in uris):
        remaining = deadline - asyncio.get_event_loop().time()
        await asyncio.wait_for(client.wait_for_notification(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS), remaining)
    return {uri: list(client.diagnostics[uri]) for uri in uris}


@pytest.mark.asyncio(loop_scope="module")
async def test_notebook_diagnostics_and_quick_fix_per_cell(client: LanguageClient, demo_store: Path) -> None:
    notebook = demo_store / "tour.ipynb"
    cells = [(types.NotebookCellKind.Markup, "markdown", "# Damaged parcels"), (types.NotebookCellKind.Code, "python", READ),
             (types.NotebookCellKind.Code, "python", CHAIN)]
    uris = [_cell_uri(notebook, n) for n in range(len(cells))]
    client.notebook_document_did_open(types.DidOpenNotebookDocumentParams(
        notebook_document=types.NotebookDocument(
            uri=notebook.as_uri(), notebook_type="jupyter-notebook", version=1,
            cells=[types.NotebookCell(kind=kind, document=uri) for (kind, _, _), uri in zip(cells, uris)]),
        cell_text_documents=[types.TextDocumentItem(uri=uri, language_id=language, version=1, text=text)
                             for (_, language, text), uri in zip(cells, uris)],
    ))
    published = await _diagnostics(client, uris[1:])
    assert published[uris[1]] == []
    (reorder,) = published[uris[2]]
    # The read in cell 2 binds the chain in cell 3; the range counts the cell's own lines.
    assert reorder.code == "reorder" and reorder.message.startswith("would run about ")
    assert (reorder.range.start.line, reorder.range.start.character) == (1, 4)

    actions = await client.text_document_code_action_async(types.CodeActionParams(
        text_document=types.TextDocumentIdentifier(uri=uris[2]), range=reorder.range,
        context=types.CodeActionContext(diagnostics=[reorder])))
    (action,) = [a for a in actions if a.kind == types.CodeActionKind.QuickFix]
    (edits,) = action.edit.changes.values() if action.edit.changes else [action.edit.document_changes[0].edits]
    (target,) = action.edit.changes.keys() if action.edit.changes else [action.edit.document_changes[0].text_document.uri]
    assert target == uris[2]
    assert _apply(CHAIN, list(edits)) == PLANNED

    # The chain's cell edited into the planned order: its diagnostic goes.
    client.notebook_document_did_change(types.DidChangeNotebookDocumentParams(
        notebook_document=types.VersionedNotebookDocumentIdentifier(uri=notebook.as_uri(), version=2),
        change=types.NotebookDocumentChangeEvent(cells=types.NotebookDocumentCellChanges(text_content=[
            types.NotebookDocumentCellContentChanges(
                document=types.VersionedTextDocumentIdentifier(uri=uris[2], version=2),
                changes=[types.TextDocumentContentChangeWholeDocument(text=PLANNED)])])),
    ))
    assert (await _diagnostics(client, [uris[2]]))[uris[2]] == []

    # A new cell between them, with the costly chain again: found in the new cell.
    new = _cell_uri(notebook, 9)
    client.notebook_document_did_change(types.DidChangeNotebookDocumentParams(
        notebook_document=types.VersionedNotebookDocumentIdentifier(uri=notebook.as_uri(), version=3),
        change=types.NotebookDocumentChangeEvent(cells=types.NotebookDocumentCellChanges(structure=types.NotebookDocumentCellChangeStructure(
            array=types.NotebookCellArrayChange(start=2, delete_count=0, cells=[types.NotebookCell(kind=types.NotebookCellKind.Code, document=new)]),
            did_open=[types.TextDocumentItem(uri=new, language_id="python", version=1, text=CHAIN)])))))
    published = await _diagnostics(client, [new, uris[2]])
    assert [d.code for d in published[new]] == ["reorder"] and published[uris[2]] == []

    client.notebook_document_did_close(types.DidCloseNotebookDocumentParams(
        notebook_document=types.NotebookDocumentIdentifier(uri=notebook.as_uri()),
        cell_text_documents=[types.TextDocumentIdentifier(uri=u) for u in uris + [new]]))
    assert (await _diagnostics(client, [new]))[new] == []


def _apply(text: str, edits: list[types.TextEdit]) -> str:
    lines = text.splitlines(keepends=True)
    starts = [0]
    for line in lines:
        starts.append(starts[-1] + len(line))
    for edit in sorted(edits, key=lambda e: (e.range.start.line, e.range.start.character), reverse=True):
        start = starts[edit.range.start.line] + edit.range.start.character
        end = starts[edit.range.end.line] + edit.range.end.character
        text = text[:start] + edit.new_text + text[end:]
    return text


@pytest.mark.asyncio(loop_scope="module")
async def test_a_cell_diagnostic_has_its_rule_s_sarif_level(client: LanguageClient, demo_store: Path) -> None:
    """Cells take the rules' one severity table, as documents do (they once had their own,
    where every rule but `unbound` was a warning)."""
    notebook = demo_store / "levels.ipynb"
    uri = _cell_uri(notebook, 0)
    text = "# chainlint: profile=nosuch\nout = scans[scans.weight_kg > 1][scans.status == 'lost']\n"
    client.notebook_document_did_open(types.DidOpenNotebookDocumentParams(
        notebook_document=types.NotebookDocument(uri=notebook.as_uri(), notebook_type="jupyter-notebook", version=1,
                                                 cells=[types.NotebookCell(kind=types.NotebookCellKind.Code, document=uri)]),
        cell_text_documents=[types.TextDocumentItem(uri=uri, language_id="python", version=1, text=text)],
    ))
    (found,) = (await _diagnostics(client, [uri]))[uri]
    assert found.code == "missing-profile" and LEVELS["missing-profile"] == "error"
    assert found.severity == types.DiagnosticSeverity.Error
