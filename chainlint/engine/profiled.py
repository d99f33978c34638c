"""Which of the project's chains a profile describes, and how their code reads its data: what
`chainlint profile` counts joint statistics for, and the reader options it follows."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import replace
from pathlib import Path

from chainlint.bind.binding import bind_chain
from chainlint.bind.profiles import ProfileSet
from chainlint.engine.options import Options
from chainlint.engine.run import analyse_file
from chainlint.discover import discover
from chainlint.model import Chain
from chainlint.profile.errors import DataError
from chainlint.profile.read_options import CsvOptions, command_flags, options_from_code
from chainlint.profile.view import ColumnProfile, Profile, ProfileSettings, RecordedFile, Source


def project_chains(sources: Sequence[str], walked: Callable[[int, int], None] | None = None) -> list[Chain]:
    """Every chain the finder sees in SRC (files it cannot read are left out); `walked` is
    told, file by file, how many files were read and how many there are."""
    files = discover(sources).files
    chains: list[Chain] = []
    for done, result in enumerate(map(analyse_file, files), start=1):
        chains.extend(result.chains)
        if walked is not None:
            walked(done, len(files))
    return chains


def code_read_options(chains: Sequence[Chain], data: Sequence[str]) -> tuple[CsvOptions | None, str | None]:
    """(the options every `pd.read_csv` of a DATA file in the code passes as literals, or None;
    why they cannot be followed, or None). Calls that read the file differently give None."""
    names = {Path(path).name for path in data}
    seen = {chain.origin.read_options for chain in chains
            if chain.origin and chain.origin.reader == "read_csv" and chain.origin.path
            and Path(chain.origin.path).name in names}
    if len(seen) != 1:
        return None, None
    (pairs,) = seen
    if not pairs:
        return None, None
    try:
        return options_from_code(pairs), None
    except DataError as error:
        return None, str(error)


def chains_for(chains: Sequence[Chain], options: Options, store: ProfileSet, name: str, data: Sequence[str],
               columns: set[str]) -> list[Chain]:
    """The chains profile NAME (of the files `data`, holding `columns`) will describe: those
    `check` binds to it, by the one set of binding rules, once it is in the store beside the
    store's other profiles."""
    # What binding reads of the profile to come: the files it records and its columns.
    stand_in = Profile(name, 0, "", "", 0, Source("stand-in", tuple(RecordedFile(path) for path in data), ""),
                       ProfileSettings(0, 0, 0, 0), tuple(ColumnProfile(column, "", "", 0, 0) for column in sorted(columns)))
    profiles = replace(store, profiles={**store.profiles, name: stand_in})
    return [chain for chain in chains if bind_chain(chain, profiles, options.bindings).profile == name]


def reader_options(given: CsvOptions, chains: Sequence[Chain], data: Sequence[str]) -> tuple[CsvOptions, list[str]]:
    """The reader options given, or (none given) those the code's own `pd.read_csv` of DATA
    passes; and what to tell the user about them."""
    if given != CsvOptions():
        return given, []
    found, problem = code_read_options(chains, data)
    notes = [f"the code's pd.read_csv options for this file are not followed: {problem}"] if problem else []
    if found is None:
        return given, notes
    return found, [*notes, f"reading as the code does: {command_flags(found)}"]
