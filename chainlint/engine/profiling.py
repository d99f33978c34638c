"""`profile` in the engine: a dataset through the profiler into the store, with exact joint
counts of the filters of the project's chains bound to the new profile."""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from chainlint.bind.profiles import load_profiles
from chainlint.discover.upward import PROJECT_MARKERS, STORE_FOLDER
from chainlint.engine.options import load_options
from chainlint.engine.profiled import chains_for, project_chains, reader_options
from chainlint.profile.build import profile_dataset
from chainlint.profile.settings import Settings
from chainlint.profile.joint import JointCounter
from chainlint.profile.read_options import CsvOptions
from chainlint.profile.pieces import Plan, plan_pieces
from chainlint.profile.readers import BATCH_ROWS, open_dataset
from chainlint.profile.store import check_name, redaction_key, save_profile, sketch_key


@dataclass
class Profiled:
    """The profile written (or unchanged), how many chains its joint counts come from (None
    without joint counts), and what to tell the user on the way."""

    document: dict[str, Any] = field(default_factory=dict)
    path: Path = Path()
    changed: bool = False
    joint_chains: int | None = None
    notes: list[str] = field(default_factory=list)


def _project_code(root: Path) -> tuple[list[str], str | None]:
    """Where the project's chains are looked for, and what to tell of it: the whole project root
    when a marker the user made says it is one (`pyproject.toml`, `chainlint.toml`, `.git`);
    else (a home folder, a folder of downloads, whose only marker may be the store an earlier
    run made there) its own files only, never its subfolders."""
    if not root.is_dir() or any(os.path.exists(root / marker) for marker in PROJECT_MARKERS if marker != STORE_FOLDER):
        return [str(root)], None
    told = (f"{root} holds no pyproject.toml, chainlint.toml or .git: the chains counted are those of its own files, "
            "not of its subfolders; --for SRC names the code to count")
    try:
        return sorted(str(path) for path in root.iterdir() if path.suffix in (".py", ".ipynb") and path.is_file()), told
    except OSError:  # a folder this user may not list holds no code to read
        return [], told


def make_profile(data: Sequence[str], name: str, folder: Path, settings: Settings, csv: CsvOptions,
                 sources: Sequence[str] = (), joint: bool = True, batch_rows: int = BATCH_ROWS,
                 progress: Callable[[int], None] | None = None, note: Callable[[str], None] = lambda _: None,
                 elsewhere: Callable[[Plan, str, Settings, JointCounter | None], dict[str, Any]] | None = None,
                 walked: Callable[[int, int], None] | None = None) -> Profiled:
    """Profile DATA as NAME into the store `folder`. `settings` is completed with the store's
    keys; without `sources` the chains counted are the project's (the store's parent folder;
    see `_project_code`); `walked` is told the files read for them so far, and how many.
    `elsewhere` counts the data's pieces somewhere else (a Dask cluster) and returns the
    document. Raises DataError, StoreError, ProfileError, ConfigError."""
    root = folder.resolve().parent
    check_name(name)
    walk, bounded = (list(sources), None) if sources or not joint else _project_code(root)
    settings = replace(settings, redaction_key=redaction_key(folder, create=bool(settings.redact)),
                       sketch_key=sketch_key(folder, create=True))
    code = project_chains(walk, walked) if joint else []
    csv, told = reader_options(csv, code, data)
    for line in told:
        note(line)
    dataset = plan_pieces(data, batch_rows, csv) if elsewhere else open_dataset(data, batch_rows=batch_rows, csv=csv)
    counter = None
    if joint:
        options = load_options(Path(sources[0]) if sources else root, root)
        chains = chains_for(code, options, load_profiles(folder.resolve()), name, [f.path for f in dataset.files],
                            set(dataset.schema.names))
        counter = JointCounter(chains, set(dataset.schema.names), settings.redact, root)
        for text, reason in sorted(counter.skipped.items()):
            note(f"skipped `{text}`: {reason}")
    if elsewhere:
        document = elsewhere(dataset, name, settings, counter)  # type: ignore[arg-type]
    else:
        document = profile_dataset(dataset, name, settings, progress, counter)  # type: ignore[arg-type]
    path, changed = save_profile(folder, document)
    if bounded:
        note(bounded)
    return Profiled(document, path, changed, None if counter is None else counter.chains)
