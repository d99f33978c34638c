"""The open documents: their analyses, kept per version, made in worker threads.

Every answer about a document comes from the analysis of its latest text: `current` returns it,
analysing first if the text changed, and returns None when the document changed (or closed)
while it was analysed, so that nothing is computed from, published for or offered on a stale
text. Analyses run in threads so that the server keeps answering about other documents; one
document is analysed by one thread at a time (its `DocumentAnalyser` holds a lock) and
re-analyses only what an edit changed.
"""

from __future__ import annotations

import asyncio
import logging
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from urllib.parse import unquote, urlparse

from pygls.workspace import Workspace

from chainlint.config import ConfigError
from chainlint.engine.document import DocumentAnalyser, DocumentAnalysis
from chainlint.engine.options import Options, load_options
from chainlint.estimate.stores import LoadedStores

logger = logging.getLogger("chainlint.lsp")


@dataclass(frozen=True)
class DocumentState:
    """The analysis of one version of a document."""

    uri: str
    version: int | None
    analysis: DocumentAnalysis


def document_path(uri: str) -> str:
    parsed = urlparse(uri)
    return unquote(parsed.path) if parsed.scheme == "file" else uri


def options_for(path: str) -> Options:
    """The options of the configuration that applies to a document (read again each time);
    report paths are relative to the document's folder."""
    folder = Path(path).parent
    try:
        return load_options(folder if folder.exists() else Path("."), folder)
    except ConfigError as error:
        logger.warning("%s", error)
        return Options(root=folder)


def _analyse(analyser: DocumentAnalyser, text: str) -> DocumentAnalysis:
    # Configuration is read again each time: a changed chainlint.toml applies at once.
    return analyser.analyse(text, options_for(analyser.path))


class Documents:
    def __init__(self, max_bytes: int) -> None:
        self.max_bytes = max_bytes
        self.states: dict[str, DocumentState] = {}
        self.analysers: dict[str, DocumentAnalyser] = {}
        self.pending: dict[str, asyncio.Task[None]] = {}
        self.stores = LoadedStores()  # the profile stores every document reads, loaded once per state
        self.executor: ThreadPoolExecutor | None = None

    def start(self, max_bytes: int) -> None:
        """Start the analysis threads (the server does when it starts serving)."""
        self.max_bytes = max_bytes
        if self.executor is None:
            self.executor = ThreadPoolExecutor(max_workers=2, thread_name_prefix="chainlint-analysis")

    def _pool(self) -> ThreadPoolExecutor:
        if self.executor is None:
            raise RuntimeError("the analysis threads are not started: call Documents.start first")
        return self.executor

    async def current(self, workspace: Workspace, uri: str) -> DocumentState | None:
        """The analysis of the document's latest text, or None (not open, or changed meanwhile)."""
        document = workspace.text_documents.get(uri)
        if document is None:
            return None
        version, text = document.version, document.source
        state = self.states.get(uri)
        if state is not None and state.version == version and state.analysis.source.text == text:
            return state
        analyser = self.analysers.get(uri)
        if analyser is None:
            analyser = self.analysers[uri] = DocumentAnalyser(document_path(uri), self.max_bytes, self.stores)
        analysis = await asyncio.get_running_loop().run_in_executor(self._pool(), _analyse, analyser, text)
        latest = workspace.text_documents.get(uri)
        if latest is None or latest.version != version or latest.source != text:
            return None
        state = self.states[uri] = DocumentState(uri, version, analysis)
        return state

    def is_current(self, workspace: Workspace, state: DocumentState) -> bool:
        document = workspace.text_documents.get(state.uri)
        return document is not None and document.version == state.version

    async def run(self, job: Callable[..., object], *args: object) -> object:
        """A job in the analysis threads (a fix is verified there, off the server's loop)."""
        return await asyncio.get_running_loop().run_in_executor(self._pool(), job, *args)

    def schedule(self, uri: str, delay: float, then: Callable[[DocumentState], None], workspace: Workspace) -> None:
        """Analyse after `delay` (a newer change cancels the wait) and hand the state to `then`."""
        previous = self.pending.pop(uri, None)
        if previous is not None and not previous.done():
            previous.cancel()
        self.pending[uri] = asyncio.ensure_future(self._refresh(uri, delay, then, workspace))

    async def _refresh(self, uri: str, delay: float, then: Callable[[DocumentState], None], workspace: Workspace) -> None:
        if delay:
            await asyncio.sleep(delay)
        try:
            state = await self.current(workspace, uri)
        except Exception:  # noqa: BLE001 - one bad document must not stop the server
            logger.exception("analysis of %s failed", uri)
            return
        if state is not None:  # None: the text changed meanwhile, and its own refresh follows
            then(state)

    def close(self, uri: str) -> None:
        task = self.pending.pop(uri, None)
        if task is not None:
            task.cancel()
        self.states.pop(uri, None)
        self.analysers.pop(uri, None)

