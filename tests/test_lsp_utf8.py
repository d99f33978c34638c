"""`chainlint lsp` with a client that offers UTF-8 positions: the server takes them."""

from __future__ import annotations

import asyncio
import sys
from pathlib import Path

import pytest
import pytest_lsp
from lsprotocol import types
from pytest_lsp import ClientServerConfig, LanguageClient

DEMO = Path(__file__).parent.parent / "examples"


@pytest_lsp.fixture(scope="module", config=ClientServerConfig(server_command=[sys.executable, "-m", "chainlint", "lsp"]))
async def client(lsp_client: LanguageClient, demo_store: Path):
    capabilities = types.ClientCapabilities(general=types.GeneralClientCapabilities(position_encodings=[types.PositionEncodingKind.Utf8]))
    result = await lsp_client.initialize_session(types.InitializeParams(capabilities=capabilities, root_uri=demo_store.as_uri()))
    assert result.capabilities.position_encoding == types.PositionEncodingKind.Utf8
    yield
    await lsp_client.shutdown_session()


@pytest.mark.asyncio(loop_scope="module")
async def test_positions_are_utf8_bytes_when_offered(client: LanguageClient, demo_store: Path) -> None:
    path = demo_store / "wide.py"
    text = 'x = "ü€"; out = scans.loc[lambda d: d.weight_kg > 0.5].loc[lambda d: d.status == "lost"]\n'
    client.text_document_did_open(types.DidOpenTextDocumentParams(
        text_document=types.TextDocumentItem(uri=path.as_uri(), language_id="python", version=1, text=text)))
    await asyncio.wait_for(client.wait_for_notification(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS), 60)
    (diagnostic,) = client.diagnostics[path.as_uri()]
    assert diagnostic.range.start.character == len(text[: text.index("scans")].encode("utf-8"))
