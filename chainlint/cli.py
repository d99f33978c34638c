"""The `chainlint` command line."""

from __future__ import annotations

import math
import os
import sys
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path

import click

from chainlint.cli_csv import csv_from, csv_options
from chainlint.cli_store import EXIT_ERROR, EXIT_FINDINGS, EXIT_OK, Progress, calibrate, fail, profiles, store_folder
from chainlint.config import ConfigError, as_toml
from chainlint.engine.check import check as run_check
from chainlint.engine.check import error_order, plan_results
from chainlint.engine.fixes import Written, attach_fixes, write_fixes
from chainlint.engine.locate import locate_planned, locate_result
from chainlint.engine.options import Options, load_options
from chainlint.engine.profiled import reader_options
from chainlint.engine.profiling import make_profile
from chainlint.engine.run import analyse_files, analyse_paths
from chainlint.version import __version__
from chainlint.profile.settings import Settings
from chainlint.profile.format import ProfileError
from chainlint.profile.read_options import CsvOptions
from chainlint.profile.errors import DataError
from chainlint.profile.readers import BATCH_ROWS
from chainlint.profile.store import StoreError, write_atomic
from chainlint.plan.groups import describe
from chainlint.profile.view import Profile
from chainlint.report.check import cell_prefix, check_json, check_lines, check_summary, error_line, shown_path
from chainlint.report.escape import printable
from chainlint.report.explain import all_errors, explain_json, explain_text, summary
from chainlint.report.sarif import check_sarif
from chainlint.rules import BY_NAME
from chainlint.writer import WriteError, write_file


class _Number(click.FloatRange):
    """A finite number in range: click's FloatRange lets NaN through (every comparison with it is false)."""

    def convert(self, value, param, ctx):  # type: ignore[no-untyped-def]
        number = super().convert(value, param, ctx)
        if not math.isfinite(number):
            self.fail(f"{value!r} is not a finite number", param, ctx)
        return number


def _jobs_option(function):  # type: ignore[no-untyped-def]
    return click.option(
        "--jobs", "-j", type=click.IntRange(min=1), default=None, help="Worker processes (default: CPU count)."
    )(function)


@click.group()
@click.version_option(__version__, prog_name="chainlint")
def main() -> None:
    """Keep chains of pandas row filters in a cheap, result-preserving order."""


main.add_command(profiles)
main.add_command(calibrate)


def _analysis_options(function):  # type: ignore[no-untyped-def]
    """Options shared by `explain` and `check`."""
    options = [
        click.argument("paths", nargs=-1, required=True, type=click.Path()),
        click.option("--exclude", multiple=True, metavar="GLOB", help="Skip paths matching GLOB (gitignore syntax); repeatable."),
        click.option("--max-file-size", type=_Number(min=0.001, max=1024.0), default=4.0, show_default=True, metavar="MB",
                     help="Report files larger than this instead of parsing them."),
        click.option("--store", type=click.Path(file_okay=False), help="Profile store (default: the nearest .chainlint/ of each file)."),
        click.option("--rows", type=click.IntRange(min=1), help="Production row count: scale estimates to it (default: the profile's rows)."),
        _jobs_option,
    ]
    for option in reversed(options):
        function = option(function)
    return function


def _options(paths: Sequence[str], rows: int | None = None, max_file_size: float = 4.0, jobs: int | None = None,
             **flags: object) -> Options:
    """The run's options: the configuration nearest to the first path, the flags over it; the
    current folder is the one report paths are relative to."""
    try:
        return load_options(Path(paths[0]) if paths else Path("."), Path.cwd(), rows=rows, jobs=jobs,
                            max_bytes=int(max_file_size * 1024 * 1024), **flags)
    except ConfigError as error:
        fail(str(error))


def _read_store(options: Options) -> None:
    """A store named on the command line or in the configuration must exist: a typo must not
    pass as a store without profiles (no findings, exit 0)."""
    if options.store is not None and not options.store.is_dir():
        where = options.config.origins.get("store", "command line")
        fail(f"the profile store {options.store} is not a folder ({'given on the command line' if where == 'command line' else 'set in ' + where})")


@main.command()
@_analysis_options
@click.option("--format", "output_format", type=click.Choice(["text", "json"]), default="text", show_default=True)
def explain(paths: Sequence[str], exclude: Sequence[str], max_file_size: float, store: str | None, rows: int | None,
            jobs: int | None, output_format: str) -> None:
    """List every chain of row filters in PATHS: steps, predicates, which steps may move, and the plan."""
    options = _options(paths, rows, max_file_size, jobs, store=store, exclude=tuple(exclude) or None)
    _read_store(options)
    results, discovery_errors = analyse_paths(paths, options)
    planned, store_errors = plan_results(results, options)
    planned = locate_planned(planned, results)
    errors = all_errors(results, discovery_errors + store_errors)
    if output_format == "json":
        click.echo(explain_json(planned, errors), nl=False)
    else:
        text = explain_text(planned)
        if text:
            click.echo(text)
        for error in errors:
            click.echo(error_line(error), err=True)
        click.echo(summary(results, len({e.path for e in errors})))
    sys.exit(EXIT_ERROR if errors else EXIT_OK)


@main.command("check")
@_analysis_options
@click.option("--format", "output_format", type=click.Choice(["text", "json", "sarif"]), default="text", show_default=True)
@click.option("--min-gain", type=_Number(min=1.0),
              help="Report a reorder only when the planned order is estimated at least this many times faster [default: 1.25].")
@click.option("--min-saving-ms", type=_Number(min=0.0),
              help="... and saves at least this many milliseconds at the estimated row count [default: 5].")
@click.option("--rule", "rules", multiple=True, type=click.Choice(sorted(BY_NAME)),
              help="Run only these rules (default: all but `unbound`); repeatable.")
@click.option("--fail-rule", "fail_rules", multiple=True, type=click.Choice(sorted(BY_NAME)),
              help="Only findings of these rules make the exit status 1; the others only report (default: all run).")
@click.option("--output", type=click.Path(dir_okay=False), help="Write the report to this file (atomically); the summary goes to stderr.")
@click.option("--diff", "show_diff", is_flag=True, help="Print the reorder fixes as a unified diff; change nothing.")
@click.option("--fix", "write", is_flag=True, help="Rewrite the files: put each costly chain into the planned order.")
def check_command(paths: Sequence[str], exclude: Sequence[str], max_file_size: float, store: str | None, rows: int | None,
                  jobs: int | None, output_format: str, min_gain: float | None, min_saving_ms: float | None,
                  rules: Sequence[str], fail_rules: Sequence[str], output: str | None, show_diff: bool, write: bool) -> None:
    """Report chains of row filters in PATHS that run in a costly order, and literals the data never holds.

    Exit status: 0 without findings (or when --fix fixed them all), 1 with findings,
    2 when a file or profile could not be read.
    """
    if show_diff and write:
        raise click.UsageError("--diff shows the fixes and changes nothing, --fix writes them: give one or the other")
    options = _options(paths, rows, max_file_size, jobs, store=store, exclude=tuple(exclude) or None, min_gain=min_gain,
                       min_saving_ms=min_saving_ms, rules=tuple(rules) or None, fail_rules=tuple(fail_rules) or None)
    _read_store(options)
    results, discovery_errors = analyse_paths(paths, options)
    if output and any(_same_file(output, r.path) for r in results):
        fail(f"--output {output} is one of the files analysed; give a report file that is not a source")
    result, fixes = attach_fixes(run_check(results, options, discovery_errors), results)
    written = write_fixes(fixes, [r.path for r in results]) if write else Written(frozenset(), ())
    for path, reason in written.refused:
        click.echo(printable(f"{path}:1:1: warning: not rewritten: {reason}"), err=True)
    if show_diff:  # a file read again and refused (changed meanwhile) would otherwise just lack its diff
        for path in sorted(path for path, fix in fixes.items() if fix.error is not None):
            click.echo(printable(f"{path}:1:1: warning: left out of the diff: {fixes[path].error}"), err=True)
    result = locate_result(result, results)
    remaining = replace(result, findings=tuple(f for f in result.findings if not written.fixed(f)))
    for finding in result.findings:
        if written.fixed(finding):
            click.echo(printable(f"{finding.path}:{finding.span.line}:{finding.span.column}: fixed: {finding.rule}: "
                                 f"{cell_prefix(finding.cell)}now runs as {describe(finding.groups or ())}"))
    if output_format == "json":
        report = check_json(result)
    elif output_format == "sarif":
        report = check_sarif(result, sorted(options.rules))
    elif show_diff:
        from chainlint.report.diff import encoded_diff

        report = b"".join(encoded_diff(fixes[path], options.root) for path in sorted(fixes) if fixes[path].new_text is not None)
    else:
        report = "".join(line + "\n" for line in check_lines(remaining))
    data = report if isinstance(report, bytes) else report.encode("utf-8")
    if output:
        try:
            write_file(output, data)
        except WriteError as error:
            fail(str(error))
    else:
        click.echo(data, nl=False)
    if output_format == "text" or output:
        for error in sorted(result.errors, key=error_order):
            click.echo(error_line(error), err=True)
        click.echo(check_summary(remaining, len(result.findings) - len(remaining.findings)), err=show_diff or bool(output))
    failed = any(f.rule in options.failing for f in remaining.findings)
    sys.exit(EXIT_ERROR if result.errors else EXIT_FINDINGS if failed else EXIT_OK)


def _same_file(first: str, second: str) -> bool:
    try:
        return os.path.samefile(first, second)
    except OSError:
        return False


@main.command()
@click.argument("data", nargs=-1, required=True)
@click.option("--name", required=True, help="Profile name (the file is .chainlint/profiles/NAME.json).")
@click.option("--store", type=click.Path(file_okay=False), help="Profile store folder (default: the project's .chainlint/).")
@click.option("--min-count", type=click.IntRange(min=1), default=5, show_default=True,
              help="Values with fewer rows than this are never written.")
@click.option("--redact", multiple=True, metavar="COLUMN", help="Store this column's values only as keyed hashes; repeatable.")
@click.option("--distinct-cap", type=click.IntRange(min=1), default=10_000, show_default=True,
              help="Count values exactly up to this many distinct ones, then estimate.")
@click.option("--top", type=click.IntRange(min=1), default=100, show_default=True, help="Most common values kept per column.")
@click.option("--batch-rows", type=click.IntRange(min=1), default=BATCH_ROWS, show_default=True,
              help="Rows read and counted at a time: memory grows with it, speed hardly.")
@click.option("--for", "sources", multiple=True, type=click.Path(), metavar="SRC",
              help="Count how the predicates of the chains in SRC (bound to NAME) combine on the data (default: the whole project); repeatable.")
@click.option("--no-joint", is_flag=True, help="Count no joint statistics: column statistics only.")
@click.option("--dask", metavar="ADDRESS", help="Count on a Dask cluster: a scheduler address (tcp://host:8786), "
              "or local[:N] for N worker processes here (needs chainlint[dask]).")
@click.option("--dask-within", type=click.FloatRange(min=0, min_open=True), metavar="SECONDS",
              help="With --dask: cancel the run if it has not finished within SECONDS (the cluster's start "
              "not counted); nothing is written.")
@csv_options
def profile(data: Sequence[str], name: str, store: str | None, min_count: int, redact: Sequence[str],
            distinct_cap: int, top: int, batch_rows: int, sources: Sequence[str], no_joint: bool, dask: str | None,
            dask_within: float | None, **reader: str | None) -> None:
    """Gather column statistics from DATA (CSV, Parquet, Feather/Arrow, JSON Lines) into a profile, with
    exact joint counts of the filters of the project's chains that it describes."""
    if dask_within is not None and not dask:
        fail("--dask-within bounds a --dask run: give --dask too")
    settings = Settings(min_count=min_count, distinct_cap=distinct_cap, top=top, redact=frozenset(redact))
    progress = Progress(sys.stderr.isatty())
    try:
        made = make_profile(data, name, store_folder(store), settings, csv_from(**reader), sources, not no_joint,  # type: ignore[arg-type]
                            batch_rows, progress, lambda note: click.echo(note, err=True),
                            (lambda *counted: _on_cluster(dask, dask_within, *counted)) if dask else None, progress.files)
    except (DataError, StoreError, ProfileError, ConfigError) as error:
        fail(str(error))
    progress.done()
    written, extra = Profile.from_document(made.document), ""
    if made.joint_chains is not None:
        extra = (f", joint counts for {len(written.joint or ())} predicate sets from {made.joint_chains} "
                 f"chain{'s' if made.joint_chains != 1 else ''}")
    click.echo(f"profile {name}: {written.rows:,} rows, {len(written.columns)} columns{extra} -> "
               f"{shown_path(made.path, Path.cwd())} ({'written' if made.changed else 'unchanged'})")


def _on_cluster(address: str, within: float | None, plan, name: str, settings: Settings, joint) -> dict:  # type: ignore[no-untyped-def, type-arg]
    """The profile counted on a Dask cluster (the `chainlint[dask]` extra, imported only here)."""
    try:
        from chainlint.cluster.run import ClusterError, TaskProgress, connect, profile_on_cluster
    except ImportError as error:
        fail(f"--dask needs Dask ({error.name} is not installed): pip install 'chainlint[dask]'")
    try:
        with connect(address) as client:
            return profile_on_cluster(client, plan, name, settings, joint, TaskProgress(sys.stderr), within)
    except ClusterError as error:
        fail(str(error))


def _reader_options(given: CsvOptions, chains: Sequence, data: Sequence[str]) -> CsvOptions:  # type: ignore[type-arg]
    chosen, notes = reader_options(given, chains, data)
    for note in notes:
        click.echo(note, err=True)
    return chosen


@main.command()
@click.argument("target", metavar="FILE[:LINE]")
@click.option("--data", "data", multiple=True, required=True, help="Data to run on (as for `profile`); repeatable.")
@click.option("--repeat", type=click.IntRange(min=1), default=5, show_default=True, help="Timed runs of each order.")
@click.option("--rows", type=click.IntRange(min=1), help="Use only the first N rows.")
@click.option("--columns", help="Comma-separated columns to load (default: all; width is part of the cost).")
@click.option("--store", type=click.Path(file_okay=False), help="Profile store (default: the nearest .chainlint/ of FILE).")
@click.option("--format", "output_format", type=click.Choice(["text", "json"]), default="text", show_default=True)
@click.option("--plot", type=click.Path(dir_okay=False), help="Also draw every measured chain in one SVG picture.")
@csv_options
def measure(target: str, data: Sequence[str], repeat: int, rows: int | None, columns: str | None, store: str | None,
            output_format: str, plot: str | None, **reader: str | None) -> None:
    """Time the written and the planned order of the chains in FILE (or the one at LINE) on real data."""
    from chainlint.measure.report import measure_json, measure_text
    from chainlint.engine.measure import measure_chains
    from chainlint.measure.run import MeasureError, load_table
    from chainlint.measure.svg import measurement_svg

    if store:
        store_folder(store, must_exist=True)
    path, _, line_text = target.partition(":")
    if line_text and not line_text.isdigit():
        path, line_text = target, ""
    if plot and _same_file(plot, path):
        fail(f"--plot {plot} is the file measured; give a picture file that is not a source")
    result = analyse_files([path], jobs=1)[0]
    if result.errors:
        error = result.errors[0]
        fail(f"{error.path}:{error.line}:{error.column}: {error.message}")
    chains = [c for c in result.chains if not line_text or c.span.line <= int(line_text) <= c.span.end_line]
    if not chains:
        fail(f"{target}: no chain of row filters {'at that line' if line_text else 'in this file'}")
    try:
        csv = _reader_options(csv_from(**reader), chains, data)  # type: ignore[arg-type]
        table = load_table(data, rows, [c.strip() for c in columns.split(",")] if columns else None, csv)
    except (DataError, MeasureError) as error:
        fail(str(error))
    shown = sys.stderr.isatty() and output_format == "text"

    def progress(chain, done: int, total: int) -> None:  # type: ignore[no-untyped-def]
        if shown:
            click.echo(f"\r  chain at line {chain.span.line}: run {done}/{total}" + (" " * 20 + "\r" if done == total else ""),
                       nl=False, err=True)

    measured = measure_chains(result, chains, table, _options([path], store=store), repeat, progress)
    for note in measured.notes:
        click.echo(note, err=True)
    click.echo((measure_json if output_format == "json" else measure_text)(measured.measurements), nl=False)
    if plot and measured.measurements:
        try:
            write_atomic(Path(plot), measurement_svg(measured.measurements))
        except StoreError as error:
            fail(str(error))
    different = [m for m in measured.measurements if not m.same_result]
    for m in different:
        click.echo(f"{m.chain.path}:{m.chain.span.line}: error: the planned order returned a different frame than the written one", err=True)
    sys.exit(EXIT_ERROR if different or measured.unrunnable or not measured.measurements else EXIT_OK)


@main.command("config")
@click.argument("path", required=False, type=click.Path())
def config_command(path: str | None) -> None:
    """Print the effective configuration for PATH (default: here) as TOML, each value with where it came from."""
    click.echo(as_toml(_options([path] if path else []).config), nl=False)


@main.command()
@click.option("--max-file-size", type=click.FloatRange(min=0.001), default=4.0, show_default=True, metavar="MB",
              help="Leave documents larger than this unanalysed (one diagnostic says so).")
def lsp(max_file_size: float) -> None:
    """Run the language server over stdio (needs the `lsp` extra: pip install 'chainlint[lsp]')."""
    try:
        from chainlint.lsp.server import main as serve
    except ImportError as error:
        fail(f"the language server needs pygls and lsprotocol: pip install 'chainlint[lsp]' ({error})")
    serve(int(max_file_size * 1024 * 1024))
