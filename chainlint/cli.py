"""The `chainlint` command line."""

from __future__ import annotations

import functools
import math
import os
import sys
import time
import zlib
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import NoReturn

import click

from chainlint.version import __version__
from chainlint.analysis.check import FAILING, RULES, Options, options_from, plan_results
from chainlint.analysis.check import check as run_check
from chainlint.model import FileProblem, Finding
from chainlint.analysis.run import analyse_files
from chainlint.analysis.profiled import chains_for, code_read_options, project_chains
from chainlint.cli_csv import csv_from, csv_options
from chainlint.config import Config, ConfigError, as_toml, load_config, override
from chainlint.discover import discover, pattern_problem
from chainlint.analysis.locate import locate_planned, locate_result
from chainlint.estimate.calibrate import COST_MODEL_FILE, model_to_json
from chainlint.estimate.calibrate import calibrate as measure_model
from chainlint.plan.chains import plan_chain
from chainlint.plan.groups import describe
from chainlint.profile.build import profile_dataset
from chainlint.profile.format import ProfileError, dumps
from chainlint.profile.joint import JointCounter
from chainlint.profile.merge import merge_profiles
from chainlint.profile.pieces import Plan, plan_pieces
from chainlint.profile.read_options import CsvOptions, command_flags
from chainlint.profile.errors import DataError
from chainlint.profile.files import fingerprint_state
from chainlint.profile.readers import BATCH_ROWS, memory_dataset, open_dataset
from chainlint.profile.settings import Settings
from chainlint.profile.view import Profile
from chainlint.profile.store import (
    StoreError,
    check_name,
    find_store,
    list_profiles,
    load_document,
    load_profile,
    profile_path,
    redaction_key,
    save_profile,
    sketch_key,
    write_atomic,
)
from chainlint.report.check import cell_prefix, check_json, check_lines, check_summary, error_line, shown_path
from chainlint.report.escape import printable
from chainlint.report.explain import all_errors, explain_json, explain_text, summary
from chainlint.report.profiles import profile_line, profile_summary
from chainlint.report.sarif import check_sarif
from chainlint.writer import WriteError, remove_stale_temporaries, write_file

EXIT_OK, EXIT_FINDINGS, EXIT_ERROR = 0, 1, 2


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


def _config(paths: Sequence[str], **given) -> Config:  # type: ignore[no-untyped-def]
    """The configuration nearest to the first path, with the command line's values over it."""
    try:
        config = load_config(Path(paths[0]) if paths else Path("."), set(RULES))
    except ConfigError as error:
        _fail(str(error))
    config = override(config, **given)
    problem = pattern_problem(config.exclude)
    if problem:
        _fail(f"--exclude: {problem}")
    return config


def _read_store(config: Config) -> None:
    """A store named on the command line or in the configuration must exist: a typo must not
    pass as a store without profiles (no findings, exit 0)."""
    if config.store is not None and not Path(config.store).is_dir():
        where = config.origins.get("store", "command line")
        _fail(f"the profile store {config.store} is not a folder ({'given on the command line' if where == 'command line' else 'set in ' + where})")


def _analyse(paths: Sequence[str], exclude: Sequence[str], max_file_size: float, jobs: int | None):  # type: ignore[no-untyped-def]
    found = discover(paths, exclude)
    results = analyse_files(found.files, jobs=jobs, max_bytes=int(max_file_size * 1024 * 1024))
    return results, [FileProblem(e.path, 1, 1, e.message) for e in found.errors]


@main.command()
@_analysis_options
@click.option("--format", "output_format", type=click.Choice(["text", "json"]), default="text", show_default=True)
def explain(paths: Sequence[str], exclude: Sequence[str], max_file_size: float, store: str | None, rows: int | None,
            jobs: int | None, output_format: str) -> None:
    """List every chain of row filters in PATHS: steps, predicates, which steps may move, and the plan."""
    config = _config(paths, store=store, exclude=tuple(exclude) or None)
    _read_store(config)
    results, discovery_errors = _analyse(paths, config.exclude, max_file_size, jobs)
    planned, store_errors = plan_results(results, replace(options_from(config), rows=rows))
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
@click.option("--rule", "rules", multiple=True, type=click.Choice(sorted(RULES)),
              help="Run only these rules (default: all but `unbound`); repeatable.")
@click.option("--fail-rule", "fail_rules", multiple=True, type=click.Choice(sorted(RULES)),
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
    config = _config(
        paths, store=store, exclude=tuple(exclude) or None, min_gain=min_gain, min_saving_ms=min_saving_ms,
        rules=tuple(rules) or None, fail_rules=tuple(fail_rules) or None,
    )
    _read_store(config)
    results, discovery_errors = _analyse(paths, config.exclude, max_file_size, jobs)
    if output and any(_same_file(output, r.path) for r in results):
        _fail(f"--output {output} is one of the files analysed; give a report file that is not a source")
    options = replace(options_from(config), rows=rows)
    result = run_check(results, options)
    fixes: dict = {}  # type: ignore[type-arg]
    if any(f.rule == "reorder" for f in result.findings):
        from chainlint.rewrite.fixes import (
            attach_fixes,  # libcst loads only when there is a fix to make
        )

        findings, fixes = attach_fixes(result.findings, results)
        result = replace(result, findings=tuple(findings))
    result = replace(result, errors=tuple(discovery_errors) + result.errors)
    if write:
        # Temporaries a killed run left beside any analysed file go, fixed or not this time.
        for folder in sorted({os.path.dirname(os.path.realpath(r.path)) for r in results}):
            remove_stale_temporaries(folder)
    written = _write_fixes(fixes) if write else set()
    result = locate_result(result, results)
    remaining = [f for f in result.findings if not _fixed(f, written)]
    for finding in result.findings:
        if _fixed(finding, written):
            click.echo(printable(f"{finding.path}:{finding.span.line}:{finding.span.column}: fixed: reorder: "
                                 f"{cell_prefix(finding.cell)}now runs as {describe(finding.groups or ())}"))
    fixed = len(result.findings) - len(remaining)
    if output_format == "json":
        report = check_json(result)
    elif output_format == "sarif":
        report = check_sarif(result, sorted(options.rules))
    elif show_diff:
        from chainlint.report.diff import unified_diff

        report = "".join(unified_diff(fixes[path]) for path in sorted(fixes) if fixes[path].new_text is not None)
    else:
        report = "".join(line + "\n" for line in check_lines(replace(result, findings=tuple(remaining))))
    if output:
        try:
            write_file(output, report.encode("utf-8"))
        except WriteError as error:
            _fail(str(error))
    else:
        click.echo(report, nl=False)
    if output_format == "text" or output:
        for error in sorted(result.errors, key=lambda e: (e.path, e.line, e.column)):
            click.echo(error_line(error), err=True)
        click.echo(check_summary(replace(result, findings=tuple(remaining)), fixed), err=show_diff or bool(output))
    failing = set(config.fail_rules or options.rules & FAILING)
    sys.exit(EXIT_ERROR if result.errors else EXIT_FINDINGS if any(f.rule in failing for f in remaining) else EXIT_OK)


def _write_fixes(fixes: dict) -> set[str]:  # type: ignore[type-arg]
    """Write every file that has a verified rewrite; the paths written."""
    from chainlint.rewrite.fixes import write_fix

    written: set[str] = set()
    done: dict[str, str] = {}  # the real file -> the new text already written to it
    for path in sorted(fixes):
        fix = fixes[path]
        real = os.path.realpath(path)
        if fix.new_text is not None and done.get(real) == fix.new_text:
            written.add(path)  # the same file under another name (a link), rewritten already
            continue
        reason = fix.error if fix.new_text is None else write_fix(fix)
        if reason is None:
            written.add(path)
            done[real] = fix.new_text
        else:
            click.echo(printable(f"{path}:1:1: warning: not rewritten: {reason}"), err=True)
    return written


def _fixed(finding: Finding, written: set[str]) -> bool:
    return finding.rule == "reorder" and finding.fix is not None and finding.path in written


def _same_file(first: str, second: str) -> bool:
    try:
        return os.path.samefile(first, second)
    except OSError:
        return False


class _Progress:
    """Rows done, rows per second and elapsed time on a terminal; silent otherwise."""

    def __init__(self, enabled: bool) -> None:
        self.enabled = enabled
        self.start = time.monotonic()
        self.shown = 0.0

    def __call__(self, rows: int) -> None:
        now = time.monotonic()
        if not self.enabled or now - self.shown < 0.1:
            return
        self.shown = now
        elapsed = now - self.start
        rate = rows / elapsed if elapsed > 0 else 0.0
        click.echo(f"\r  {rows:>14,} rows  {rate:>12,.0f} rows/s  {elapsed:6.1f} s", nl=False, err=True)

    def done(self) -> None:
        if self.enabled:
            click.echo("\r" + " " * 60 + "\r", nl=False, err=True)


def _store(store: str | None, must_exist: bool = False) -> Path:
    """The store given, or the project's; one given to read from must exist (a typo must not
    pass as an empty store)."""
    if store and must_exist and not Path(store).is_dir():
        _fail(f"the profile store {store} is not a folder")
    return Path(store) if store else find_store(".")


def _fail(message: str) -> NoReturn:
    click.echo(f"chainlint: error: {printable(message)}", err=True)
    sys.exit(EXIT_ERROR)


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
@csv_options
def profile(data: Sequence[str], name: str, store: str | None, min_count: int, redact: Sequence[str],
            distinct_cap: int, top: int, batch_rows: int, sources: Sequence[str], no_joint: bool, dask: str | None,
            **reader: str | None) -> None:
    """Gather column statistics from DATA (CSV, Parquet, Feather/Arrow, JSON Lines) into a profile, with
    exact joint counts of the filters of the project's chains that it describes."""
    folder = _store(store)
    root = folder.resolve().parent
    try:
        check_name(name)
        key = redaction_key(folder, create=bool(redact))
        settings = Settings(min_count=min_count, distinct_cap=distinct_cap, top=top,
                            redact=frozenset(redact), redaction_key=key, sketch_key=sketch_key(folder, create=True))
        csv = csv_from(**reader)  # type: ignore[arg-type]
        code = [] if no_joint else project_chains(sources or [str(root)])
        csv = _code_options(csv, code, data)
        dataset = plan_pieces(data, batch_rows, csv) if dask else open_dataset(data, batch_rows=batch_rows, csv=csv)
        joint = None
        if not no_joint:
            config = _config(list(sources or [str(root)]))
            chains = chains_for(code, config, name, {Path(f.path).name for f in dataset.files}, set(dataset.schema.names))
            joint = JointCounter(chains, set(dataset.schema.names), frozenset(redact), root)
            for text, reason in sorted(joint.skipped.items()):
                click.echo(f"skipped `{text}`: {reason}", err=True)
        if dask:
            document = _on_cluster(dask, dataset, name, settings, joint)  # type: ignore[arg-type]
        else:
            progress = _Progress(sys.stderr.isatty())
            document = profile_dataset(dataset, name, settings, progress, joint)  # type: ignore[arg-type]
            progress.done()
        path, changed = save_profile(folder, document)
    except (DataError, StoreError, ProfileError) as error:
        _fail(str(error))
    made = Profile.from_document(document)
    state = "written" if changed else "unchanged"
    extra = ""
    if joint is not None:
        extra = f", joint counts for {len(made.joint or ())} predicate sets from {joint.chains} chain{'s' if joint.chains != 1 else ''}"
    click.echo(f"profile {name}: {made.rows:,} rows, {len(made.columns)} columns{extra} -> {shown_path(path)} ({state})")


def _on_cluster(address: str, plan: Plan, name: str, settings: Settings, joint: JointCounter | None) -> dict:  # type: ignore[type-arg]
    """The profile counted on a Dask cluster (the `chainlint[dask]` extra, imported only here)."""
    try:
        from chainlint.cluster.run import ClusterError, TaskProgress, connect, profile_on_cluster
    except ImportError as error:
        _fail(f"--dask needs Dask ({error.name} is not installed): pip install 'chainlint[dask]'")
    try:
        with connect(address) as client:
            return profile_on_cluster(client, plan, name, settings, joint, TaskProgress(sys.stderr))
    except ClusterError as error:
        _fail(str(error))


def _code_options(given: CsvOptions, chains: Sequence, data: Sequence[str]) -> CsvOptions:  # type: ignore[type-arg]
    """The reader options given, or (none given) those the code's own `pd.read_csv` of DATA passes."""
    if given != CsvOptions():
        return given
    found, problem = code_read_options(chains, data)
    if problem:
        click.echo(f"the code's pd.read_csv options for this file are not followed: {problem}", err=True)
    if found is None:
        return given
    click.echo(f"reading as the code does: {command_flags(found)}", err=True)
    return found


@main.group(invoke_without_command=True)
@click.option("--store", type=click.Path(file_okay=False), help="Profile store folder (default: the project's .chainlint/).")
@click.pass_context
def profiles(context: click.Context, store: str | None) -> None:
    """List the store's profiles; `show NAME` summarises one, `merge NAME PART...` combines parts."""
    if store:
        _store(store, must_exist=True)
    context.obj = store
    if context.invoked_subcommand is None:
        context.obj = _store(store)
        try:
            found = list_profiles(context.obj)
        except StoreError as error:
            _fail(str(error))
        if not found:
            click.echo(f"no profiles in {context.obj}")
        failed = False
        for path in found:
            try:
                click.echo(profile_line(path, load_profile(path)))
            except ProfileError as error:
                click.echo(f"chainlint: error: {error}", err=True)
                failed = True
        sys.exit(EXIT_ERROR if failed else EXIT_OK)


def _store_here(function):  # type: ignore[no-untyped-def]
    """`--store` after the subcommand as well as before it (`profiles show NAME --store DIR`)."""
    @click.option("--store", "own_store", type=click.Path(file_okay=False),
                  help="Profile store folder (default: the project's .chainlint/).")
    @click.pass_obj
    @functools.wraps(function)
    def wrapper(group_store: str | None, own_store: str | None, **kwargs):  # type: ignore[no-untyped-def]
        return function(_store(own_store or group_store), **kwargs)
    return wrapper


@profiles.command()
@click.argument("name")
@click.option("--top", type=click.IntRange(min=1), default=5, show_default=True, help="Top values shown per column.")
@_store_here
def show(folder: Path, name: str, top: int) -> None:
    """Summarise profile NAME: per column type, nulls, distinct, top values with shares, range."""
    try:
        profile = load_profile(profile_path(folder, name))
    except (ProfileError, StoreError) as error:
        _fail(str(error))
    click.echo(profile_summary(profile, top), nl=False)


@profiles.command("check")
@click.argument("names", nargs=-1)
@_store_here
def check_profiles(folder: Path, names: Sequence[str]) -> None:
    """Tell whether profiles (default: all) are out of date: their data files' content changed.

    Exit status: 0 when all are current, 1 when one is out of date, 2 when a file is missing.
    """
    try:
        paths = [profile_path(folder, n) for n in names] if names else list_profiles(folder)
    except StoreError as error:
        _fail(str(error))
    worst = EXIT_OK
    for path in paths:
        try:
            profile = load_profile(path)
        except (ProfileError, StoreError) as error:
            click.echo(f"chainlint: error: {printable(str(error))}", err=True)
            worst = EXIT_ERROR
            continue
        state, detail = fingerprint_state(profile, folder)
        click.echo(f"{profile.name}: {state}{': ' + detail if detail else ''}")
        worst = max(worst, {"up to date": EXIT_OK, "out of date": EXIT_FINDINGS}.get(state, EXIT_ERROR))
    sys.exit(worst)


@profiles.command()
@click.argument("name")
@click.argument("parts", nargs=-1, required=True)
@_store_here
def merge(folder: Path, name: str, parts: Sequence[str]) -> None:
    """Combine the profiles PARTS (names in the store) of one dataset into profile NAME."""
    try:
        check_name(name)
        documents = [load_document(profile_path(folder, part)) for part in parts]
        path, changed = save_profile(folder, merge_profiles(documents, name, sketch_key(folder, create=False)))
    except (ProfileError, StoreError) as error:
        _fail(str(error))
    except (ValueError, zlib.error) as error:  # a part's sketch that does not decode
        _fail(f"cannot merge {', '.join(parts)}: {error}")
    click.echo(f"profile {name}: merged from {len(parts)} parts -> {path} ({'written' if changed else 'unchanged'})")


@main.command()
@click.option("--store", type=click.Path(file_okay=False), help="Profile store folder (default: the project's .chainlint/).")
@click.option("--rows", type=click.IntRange(min=10_000), default=400_000, show_default=True, help="Rows of the frame timed.")
def calibrate(store: str | None, rows: int) -> None:
    """Re-measure the cost model on this machine and keep it in the store (cost-model.json)."""
    folder = _store(store)
    click.echo(f"timing pandas on {rows:,} rows ...", err=True)
    model = measure_model(rows)
    path = folder / COST_MODEL_FILE
    try:
        write_atomic(path, dumps(model_to_json(model)))
    except StoreError as error:
        _fail(str(error))
    click.echo(
        f"cost model -> {path}: numeric == {model.compare['numeric']:.2f} ns/row, str == {model.compare['str']:.2f} ns/row, "
        f"fixed {model.fixed / 1e6:.2f} ms/step"
    )
    click.echo("commit it beside the profiles, so that CI and every machine plan with this model", err=True)


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
    from chainlint.measure.run import DataMismatch, MeasureError, as_read_csv, load_table, measure_chain
    from chainlint.measure.svg import measurement_svg

    if store:
        _store(store, must_exist=True)
    path, _, line_text = target.partition(":")
    if line_text and not line_text.isdigit():
        path, line_text = target, ""
    if plot and _same_file(plot, path):
        _fail(f"--plot {plot} is the file measured; give a picture file that is not a source")
    result = analyse_files([path], jobs=1)[0]
    if result.errors:
        error = result.errors[0]
        _fail(f"{error.path}:{error.line}:{error.column}: {error.message}")
    chains = [c for c in result.chains if not line_text or c.span.line <= int(line_text) <= c.span.end_line]
    if not chains:
        _fail(f"{target}: no chain of row filters {'at that line' if line_text else 'in this file'}")
    try:
        csv = _code_options(csv_from(**reader), chains, data)  # type: ignore[arg-type]
        table = load_table(data, rows, [c.strip() for c in columns.split(",")] if columns else None, csv)
    except (DataError, MeasureError) as error:
        _fail(str(error))
    frame = as_read_csv(table)
    planned, problems = plan_results([replace(result, chains=tuple(chains))], Options(store=Path(store) if store else None, rows=len(frame)))
    in_memory = None
    measurements, notes = [], []
    unrunnable = 0
    progress_shown = sys.stderr.isatty() and output_format == "text"
    for item in planned:
        plan = item.plan
        if plan is None:
            if in_memory is None:
                in_memory = _profile_in_memory(table)
            plan = plan_chain(item.chain, item.binding, in_memory, len(frame))
            notes.append(f"{item.chain.path}:{item.chain.span.line}: no profile ({item.binding.reason}); planned with statistics of the data given")

        def progress(done: int, total: int, line: int = item.chain.span.line) -> None:
            if progress_shown:
                click.echo(f"\r  chain at line {line}: run {done}/{total}", nl=False, err=True)

        try:
            measurements.append(measure_chain(frame, item.chain, plan.groups, plan.speedup, repeat, progress, plan.single))
        except DataMismatch as error:
            needs = "columns " + ", ".join(sorted({c for step in item.chain.steps for c in step.columns}))
            if item.binding.profile:
                needs += f", as in the data of profile `{item.binding.profile}`"
            notes.append(f"{item.chain.path}:{item.chain.span.line}: error: cannot run this chain: {error}; it needs {needs}")
            unrunnable += 1
        except MeasureError as error:
            notes.append(f"{item.chain.path}:{item.chain.span.line}: cannot measure: {error}")
        if progress_shown:
            click.echo("\r" + " " * 50 + "\r", nl=False, err=True)
    for note in notes:
        click.echo(note, err=True)
    if output_format == "json":
        click.echo(measure_json(measurements), nl=False)
    else:
        click.echo(measure_text(measurements), nl=False)
    if plot and measurements:
        try:
            write_atomic(Path(plot), measurement_svg(measurements))
        except StoreError as error:
            _fail(str(error))
    different = [m for m in measurements if not m.same_result]
    for m in different:
        click.echo(f"{m.chain.path}:{m.chain.span.line}: error: the planned order returned a different frame than the written one", err=True)
    sys.exit(EXIT_ERROR if different or unrunnable or not measurements else EXIT_OK)


def _profile_in_memory(table):  # type: ignore[no-untyped-def]
    """An estimator over statistics of the loaded data, for chains no stored profile describes."""
    from chainlint.estimate.selectivity import Estimator

    return Estimator(Profile.from_document(profile_dataset(memory_dataset(table), "in-memory", Settings())))


@main.command("config")
@click.argument("path", required=False, type=click.Path())
def config_command(path: str | None) -> None:
    """Print the effective configuration for PATH (default: here) as TOML, each value with where it came from."""
    click.echo(as_toml(_config([path] if path else [])), nl=False)


@main.command()
@click.option("--max-file-size", type=click.FloatRange(min=0.001), default=4.0, show_default=True, metavar="MB",
              help="Leave documents larger than this unanalysed (one diagnostic says so).")
def lsp(max_file_size: float) -> None:
    """Run the language server over stdio (needs the `lsp` extra: pip install 'chainlint[lsp]')."""
    try:
        from chainlint.lsp.server import main as serve
    except ImportError as error:
        _fail(f"the language server needs pygls and lsprotocol: pip install 'chainlint[lsp]' ({error})")
    serve(int(max_file_size * 1024 * 1024))
