"""Analyse files: read, screen, parse, find. One file's failure never stops the others."""

from __future__ import annotations

import multiprocessing
import os
from collections.abc import Iterable, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import replace

from chainlint.discover import discover
from chainlint.engine.options import Options
from chainlint.find.chains import find_chains
from chainlint.find.screen import find_seams
from chainlint.model import Cell, CellLines, FileAnalysis, FileProblem
from chainlint.parse.notebooks import Notebook, is_notebook, notebook_from_text
from chainlint.parse.source import DEFAULT_MAX_BYTES, SourceError, SourceText, parse_tree, read_source, text_digest

#: Below this many files a process pool costs more than it saves.
_POOL_THRESHOLD = 16


def analyse_source(source: SourceText) -> FileAnalysis:
    """Find the chains of an already decoded file (the editor's in-memory text, say)."""
    seams = find_seams(source.text)
    if seams.empty:
        return FileAnalysis(source.path, digest=text_digest(source.text))
    try:
        tree = parse_tree(source)
        chains = find_chains(source, tree, seams)
    except SourceError as error:
        return FileAnalysis(source.path, errors=(FileProblem(source.path, error.line, error.column, error.message),))
    except RecursionError:
        message = "nesting too deep to analyse"
        return FileAnalysis(source.path, errors=(FileProblem(source.path, 1, 1, message),))
    return FileAnalysis(source.path, chains=tuple(chains), digest=text_digest(source.text))


def analyse_file(path: str, max_bytes: int = DEFAULT_MAX_BYTES) -> FileAnalysis:
    try:
        source = read_source(path, max_bytes)
        if is_notebook(path):
            return analyse_notebook(notebook_from_text(path, source.text))
    except SourceError as error:
        return FileAnalysis(path, errors=(FileProblem(path, error.line, error.column, error.message),))
    return analyse_source(source)


def analyse_notebook(notebook: Notebook) -> FileAnalysis:
    """A notebook's code cells analysed as one module; errors are located in their cells."""
    analysis = analyse_source(notebook.source)
    cells = tuple(CellLines(Cell(c.number, c.id), c.first_line, c.line_count) for c in notebook.cells)
    errors = []
    for line, column, message in [(e.line, e.column, e.message) for e in analysis.errors] + list(notebook.errors):
        cell = notebook.cell_at_line(line)
        if cell is None:
            errors.append(FileProblem(notebook.path, 1, 1, message))
        else:
            errors.append(FileProblem(notebook.path, line - cell.first_line + 1, column, message, Cell(cell.number, cell.id)))
    return replace(analysis, errors=tuple(errors), cells=cells)


def _analyse_job(job: tuple[str, int]) -> FileAnalysis:
    return analyse_file(*job)


def analyse_files(paths: Sequence[str], jobs: int | None = None, max_bytes: int = DEFAULT_MAX_BYTES) -> list[FileAnalysis]:
    """Analyse files, in a process pool when there are enough of them; results in path order."""
    work = [(path, max_bytes) for path in paths]
    # More workers than files or cores only cost start-up time and memory.
    workers = min(jobs or os.cpu_count() or 1, os.cpu_count() or 1, len(work))
    results: Iterable[FileAnalysis]
    if workers <= 1 or len(work) < _POOL_THRESHOLD:
        results = map(_analyse_job, work)
        return list(results)
    context = multiprocessing.get_context("fork" if "fork" in multiprocessing.get_all_start_methods() else None)
    with ProcessPoolExecutor(max_workers=workers, mp_context=context) as pool:
        chunk = max(1, len(work) // (workers * 8))
        return list(pool.map(_analyse_job, work, chunksize=chunk))


def analyse_paths(paths: Sequence[str], options: Options) -> tuple[list[FileAnalysis], list[FileProblem]]:
    """The files the paths name (discovery, with the options' excludes), analysed; and the
    paths that could not be listed, as located errors."""
    found = discover(paths, options.exclude)
    results = analyse_files(found.files, jobs=options.jobs, max_bytes=options.max_bytes)
    return results, [FileProblem(e.path, 1, 1, e.message) for e in found.errors]
