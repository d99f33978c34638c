"""The profile store's commands (`profiles`, `profiles show|check|merge`, `calibrate`) and what
the command line's modules share: the exit statuses, a located failure, the store folder,
progress on a terminal."""

from __future__ import annotations

import functools
import sys
import time
import zlib
from collections.abc import Sequence
from pathlib import Path
from typing import NoReturn

import click

from chainlint.estimate.calibrate import COST_MODEL_FILE, model_to_json
from chainlint.estimate.calibrate import calibrate as measure_model
from chainlint.profile.format import ProfileError, dumps
from chainlint.profile.merge import merge_profiles
from chainlint.profile.files import fingerprint_state
from chainlint.profile.store import (
    StoreError,
    check_name,
    find_store,
    list_profiles,
    load_document,
    load_profile,
    profile_path,
    save_profile,
    sketch_key,
    write_atomic,
)
from chainlint.report.escape import printable
from chainlint.report.profiles import profile_line, profile_summary

EXIT_OK, EXIT_FINDINGS, EXIT_ERROR = 0, 1, 2


class Progress:
    """Files read for chains, then rows done, rows per second and elapsed time, on a terminal;
    silent otherwise."""

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

    def files(self, done: int, total: int) -> None:
        """Files read for the project's chains (before any row: a large folder takes a while)."""
        now = time.monotonic()
        if not self.enabled or (now - self.shown < 0.1 and done < total):
            return
        self.shown = now
        click.echo(f"\r  looking for chains: {done:,} of {total:,} files", nl=False, err=True)

    def done(self) -> None:
        if self.enabled:
            click.echo("\r" + " " * 60 + "\r", nl=False, err=True)


def store_folder(store: str | None, must_exist: bool = False) -> Path:
    """The store given, or the project's; one given to read from must exist (a typo must not
    pass as an empty store)."""
    if store and must_exist and not Path(store).is_dir():
        fail(f"the profile store {store} is not a folder")
    return Path(store) if store else find_store(".")


def fail(message: str) -> NoReturn:
    click.echo(f"chainlint: error: {printable(message)}", err=True)
    sys.exit(EXIT_ERROR)


@click.group(invoke_without_command=True)
@click.option("--store", type=click.Path(file_okay=False), help="Profile store folder (default: the project's .chainlint/).")
@click.pass_context
def profiles(context: click.Context, store: str | None) -> None:
    """List the store's profiles; `show NAME` summarises one, `merge NAME PART...` combines parts."""
    if store:
        store_folder(store, must_exist=True)
    context.obj = store
    if context.invoked_subcommand is None:
        context.obj = store_folder(store)
        try:
            found = list_profiles(context.obj)
        except StoreError as error:
            fail(str(error))
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
        return function(store_folder(own_store or group_store), **kwargs)
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
        fail(str(error))
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
        fail(str(error))
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
        fail(str(error))
    except (ValueError, zlib.error) as error:  # a part's sketch that does not decode
        fail(f"cannot merge {', '.join(parts)}: {error}")
    click.echo(f"profile {name}: merged from {len(parts)} parts -> {path} ({'written' if changed else 'unchanged'})")


@click.command()
@click.option("--store", type=click.Path(file_okay=False), help="Profile store folder (default: the project's .chainlint/).")
@click.option("--rows", type=click.IntRange(min=10_000), default=2_000_000, show_default=True,
              help="Rows of the frames timed (fewer fit in a processor's cache, and price kept rows low).")
def calibrate(store: str | None, rows: int) -> None:
    """Re-measure the cost model on this machine and keep it in the store (cost-model.json)."""
    folder = store_folder(store)
    click.echo(f"timing pandas on {rows:,} rows ...", err=True)
    model = measure_model(rows)
    path = folder / COST_MODEL_FILE
    try:
        write_atomic(path, dumps(model_to_json(model)))
    except StoreError as error:
        fail(str(error))
    click.echo(
        f"cost model -> {path}: numeric == {model.compare['numeric']:.2f} ns/row, str == {model.compare['str']:.2f} ns/row, "
        f"fixed {model.fixed / 1e6:.2f} ms/step"
    )
    click.echo("commit it beside the profiles, so that CI and every machine plan with this model", err=True)
