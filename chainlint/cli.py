"""The `chainlint` command line."""

from __future__ import annotations

import sys
from collections.abc import Sequence

import click

from chainlint import __version__
from chainlint.analysis.model import FileError
from chainlint.analysis.run import analyse_files
from chainlint.discover import discover
from chainlint.report.explain import all_errors, explain_json, explain_text, summary

EXIT_OK, EXIT_FINDINGS, EXIT_ERROR = 0, 1, 2


def _jobs_option(function):  # type: ignore[no-untyped-def]
    return click.option(
        "--jobs", "-j", type=click.IntRange(min=1), default=None, help="Worker processes (default: CPU count)."
    )(function)


@click.group()
@click.version_option(__version__, prog_name="chainlint")
def main() -> None:
    """Keep chains of pandas row filters in a cheap, result-preserving order."""


@main.command()
@click.argument("paths", nargs=-1, required=True, type=click.Path())
@click.option("--format", "output_format", type=click.Choice(["text", "json"]), default="text", show_default=True)
@click.option("--exclude", multiple=True, metavar="GLOB", help="Skip paths matching GLOB (gitignore syntax); repeatable.")
@click.option("--max-file-size", type=click.FloatRange(min=0.001), default=4.0, show_default=True, metavar="MB",
              help="Report files larger than this instead of parsing them.")
@_jobs_option
def explain(paths: Sequence[str], output_format: str, exclude: Sequence[str], max_file_size: float, jobs: int | None) -> None:
    """List every chain of row filters in PATHS: steps, predicates, and which steps may move."""
    found = discover(paths, exclude)
    results = analyse_files(found.files, jobs=jobs, max_bytes=int(max_file_size * 1024 * 1024))
    discovery_errors = [FileError(e.path, 1, 1, e.message) for e in found.errors]
    errors = all_errors(results, discovery_errors)
    if output_format == "json":
        click.echo(explain_json(results, discovery_errors), nl=False)
    else:
        text = explain_text(results)
        if text:
            click.echo(text)
        for error in errors:
            click.echo(f"{error.path}:{error.line}:{error.column}: error: {error.message}", err=True)
        click.echo(summary(results, len({e.path for e in errors})))
    sys.exit(EXIT_ERROR if errors else EXIT_OK)
