"""Which of the project's chains a profile describes, and how their code reads its data: what
`chainlint profile` counts joint statistics for, and the reader options it follows."""

from __future__ import annotations

import fnmatch
from collections.abc import Sequence
from pathlib import Path

from chainlint.analysis.run import analyse_files
from chainlint.config import Config
from chainlint.discover import discover
from chainlint.model import Chain
from chainlint.profile.errors import DataError
from chainlint.profile.read_options import CsvOptions, options_from_code


def project_chains(sources: Sequence[str]) -> list[Chain]:
    """Every chain the finder sees in SRC (files it cannot read are left out)."""
    found = discover(sources)
    return [chain for result in analyse_files(found.files, jobs=1) for chain in result.chains]


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


def chains_for(chains: Sequence[Chain], config: Config, name: str, data_names: set[str], columns: set[str]) -> list[Chain]:
    """The chains profile NAME describes: bound to it by a comment, the configuration or the
    file they read, or (bound to nothing else) reading only its columns."""
    chosen = []
    for chain in chains:
        origin = chain.origin
        named = chain.profile_comment or (origin.profile if origin else None)
        if named is None and origin is not None:
            named = next((p for pattern, p in config.bindings if fnmatch.fnmatchcase(origin.name, pattern)), None)
        if named is None and origin is not None and origin.path and Path(origin.path).name in data_names:
            named = name
        reads = {c for step in chain.steps for c in step.predicate.columns()}
        if named == name or (named is None and reads <= columns):
            chosen.append(chain)
    return chosen
