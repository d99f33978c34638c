"""`chainlint lsp` end to end, with pytest-lsp as a real client over stdio."""

from __future__ import annotations

import asyncio
import shutil
import sys
from pathlib import Path

import pytest
import pytest_lsp
from lsprotocol import types
from pytest_lsp import ClientServerConfig, LanguageClient, client_capabilities

DEMO = Path(__file__).parent.parent / "examples"
TIMEOUT = 60


@pytest.fixture(scope="module")
def project(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("lsp")
    shutil.copytree(DEMO / ".chainlint", root / ".chainlint")
    return root


@pytest_lsp.fixture(scope="module", config=ClientServerConfig(server_command=[sys.executable, "-m", "chainlint", "lsp"]))
async def client(lsp_client: LanguageClient, project: Path):
    capabilities = client_capabilities("visual-studio-code")
    await lsp_client.initialize_session(types.InitializeParams(capabilities=capabilities, root_uri=project.as_uri()))
    yield
    await lsp_client.shutdown_session()


async def _open(client: LanguageClient, path: Path, text: str, version: int = 1) -> list[types.Diagnostic]:
    uri = path.as_uri()
    client.text_document_did_open(types.DidOpenTextDocumentParams(
        text_document=types.TextDocumentItem(uri=uri, language_id="python", version=version, text=text)))
    await asyncio.wait_for(client.wait_for_notification(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS), TIMEOUT)
    return list(client.diagnostics[uri])  # lsprotocol gives tuples


async def _change(client: LanguageClient, path: Path, text: str, version: int) -> list[types.Diagnostic]:
    uri = path.as_uri()
    client.text_document_did_change(types.DidChangeTextDocumentParams(
        text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=version),
        content_changes=[types.TextDocumentContentChangeWholeDocument(text=text)]))
    await asyncio.wait_for(client.wait_for_notification(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS), TIMEOUT)
    return list(client.diagnostics[uri])


@pytest.mark.asyncio(loop_scope="module")
async def test_diagnostics_quick_fix_and_clearing(client: LanguageClient, project: Path) -> None:
    path = project / "pipeline.py"
    text = (DEMO / "pipeline.py").read_text()
    found = await _open(client, path, text)
    codes = sorted(d.code for d in found)
    assert codes == ["never-matches", "reorder", "reorder"]
    first = next(d for d in found if d.code == "reorder")
    assert first.range.start.line == 14 and first.source == "chainlint"
    actions = await asyncio.wait_for(client.text_document_code_action_async(types.CodeActionParams(
        text_document=types.TextDocumentIdentifier(uri=path.as_uri()), range=first.range,
        context=types.CodeActionContext(diagnostics=[first]))), TIMEOUT)
    (action,) = actions
    (edit,) = action.edit.changes[path.as_uri()]
    lines = text.splitlines(keepends=True)
    start = sum(len(l) for l in lines[: edit.range.start.line]) + edit.range.start.character
    end = sum(len(l) for l in lines[: edit.range.end.line]) + edit.range.end.character
    fixed = text[:start] + edit.new_text + text[end:]
    assert fixed.index('"damaged"') < fixed.index('"WEST"')
    after = await _change(client, path, fixed, 2)
    assert sorted(d.code for d in after) == ["never-matches", "reorder"]


@pytest.mark.asyncio(loop_scope="module")
async def test_unsaved_text_counts_and_hover_shows_the_plan(client: LanguageClient, project: Path) -> None:
    path = project / "unsaved.py"  # never written to disk
    text = 'def f(scans):\n    return scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n'
    found = await _open(client, path, text)
    assert [d.code for d in found] == ["reorder"]
    result = await asyncio.wait_for(client.text_document_hover_async(types.HoverParams(
        text_document=types.TextDocumentIdentifier(uri=path.as_uri()), position=types.Position(line=1, character=14))), TIMEOUT)
    assert "| written | 1 | `weight_kg > 0.5` |" in result.contents.value
    assert "profile `parcel_scans`" in result.contents.value


@pytest.mark.asyncio(loop_scope="module")
async def test_positions_are_utf16_after_non_ascii_text(client: LanguageClient, project: Path) -> None:
    path = project / "wide.py"
    prefix = 'x = "𝔘𝔫𝔦"; '  # three characters outside the BMP: two UTF-16 units each
    text = prefix + 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n'
    (diagnostic,) = await _open(client, path, text)
    characters = text.index("scans")
    assert diagnostic.range.start.character == characters + 3


@pytest.mark.asyncio(loop_scope="module")
async def test_bad_input_does_not_stop_the_server(client: LanguageClient, project: Path, tmp_path: Path) -> None:
    broken = project / "broken.py"
    assert await _open(client, broken, "def broken(:\n    scans[scans.a > 1][scans.b > 2]\n") == []
    outside = tmp_path / "elsewhere" / "m.py"
    assert await _open(client, outside, "out = frame[frame.a == 1][frame.b == 2]\n") == []
    # Still alive: a fresh document gets its diagnostics.
    alive = await _open(client, project / "alive.py", 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n')
    assert [d.code for d in alive] == ["reorder"]


@pytest.mark.asyncio(loop_scope="module")
async def test_configuration_changes_are_picked_up(client: LanguageClient, project: Path) -> None:
    path = project / "configured.py"
    text = 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n'
    assert [d.code for d in await _open(client, path, text)] == ["reorder"]
    (project / "chainlint.toml").write_text("min_gain = 1000.0\n")
    try:
        assert await _change(client, path, text + "\n", 2) == []
    finally:
        (project / "chainlint.toml").unlink()
    assert [d.code for d in await _change(client, path, text, 3)] == ["reorder"]


@pytest.mark.asyncio(loop_scope="module")
async def test_requests_about_unknown_documents_or_places_get_empty_answers(client: LanguageClient, project: Path) -> None:
    unknown = types.TextDocumentIdentifier(uri=(project / "never-opened.py").as_uri())
    hover = await asyncio.wait_for(client.text_document_hover_async(
        types.HoverParams(text_document=unknown, position=types.Position(line=999, character=999))), TIMEOUT)
    assert hover is None
    actions = await asyncio.wait_for(client.text_document_code_action_async(types.CodeActionParams(
        text_document=unknown, range=types.Range(start=types.Position(line=5, character=0), end=types.Position(line=2, character=0)),
        context=types.CodeActionContext(diagnostics=[]))), TIMEOUT)
    assert not actions  # None or an empty sequence (lsprotocol gives tuples)
    path = project / "short.py"
    await _open(client, path, 'out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n')
    far = await asyncio.wait_for(client.text_document_hover_async(types.HoverParams(
        text_document=types.TextDocumentIdentifier(uri=path.as_uri()), position=types.Position(line=40, character=3))), TIMEOUT)
    assert far is None
