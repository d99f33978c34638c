"""Language-server latency: from a change notification to the published diagnostics.

A 2,000-line module with 20 chains is opened, then edited 50 times (a change that keeps it
valid); each time the delay until its diagnostics arrive is measured. Goal: p95 at most
100 ms (0.1 s is the published limit for a response to feel instantaneous: Nielsen,
Usability Engineering, 1993). The server debounces changes by 25 ms, which is included.
Usage: python benchmarks/lsp_latency.py [--edits N]
"""

from __future__ import annotations

import argparse
import asyncio
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

from lsprotocol import types
from pytest_lsp import client_capabilities, make_test_lsp_client

sys.path.insert(0, str(Path(__file__).parent))
from fix_speed import module  # noqa: E402  (the same 2,000-line module with 20 chains)

EXAMPLES = Path(__file__).parent.parent / "examples"


async def run(edits: int) -> list[float]:
    with tempfile.TemporaryDirectory() as folder:
        root = Path(folder)
        shutil.copytree(EXAMPLES / ".chainlint", root / ".chainlint")
        uri = (root / "big.py").as_uri()
        text = module()
        client = make_test_lsp_client()
        await client.start_io(sys.executable, "-m", "chainlint", "lsp")
        await client.initialize_session(types.InitializeParams(capabilities=client_capabilities("visual-studio-code"), root_uri=root.as_uri()))
        client.text_document_did_open(types.DidOpenTextDocumentParams(
            text_document=types.TextDocumentItem(uri=uri, language_id="python", version=1, text=text)))
        await client.wait_for_notification(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS)
        assert len(client.diagnostics[uri]) == 20, client.diagnostics[uri]
        delays = []
        for version in range(2, edits + 2):
            text = text + f"\nvalue_{version} = {version}\n"
            start = time.perf_counter()
            client.text_document_did_change(types.DidChangeTextDocumentParams(
                text_document=types.VersionedTextDocumentIdentifier(uri=uri, version=version),
                content_changes=[types.TextDocumentContentChangeWholeDocument(text=text)]))
            await client.wait_for_notification(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS)
            delays.append(time.perf_counter() - start)
        await client.shutdown_session()
        return delays


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--edits", type=int, default=50)
    args = parser.parse_args()
    delays = sorted(asyncio.run(run(args.edits)))
    p95 = delays[max(0, int(round(0.95 * len(delays))) - 1)]
    print(f"{len(delays)} edits of a 2,000-line module with 20 chains: median {statistics.median(delays) * 1e3:.0f} ms, "
          f"p95 {p95 * 1e3:.0f} ms (goal <= 100 ms), max {delays[-1] * 1e3:.0f} ms")


if __name__ == "__main__":
    main()
