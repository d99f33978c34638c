"""Rules tested directly: module text and an in-memory profile in, findings out.

    profile = profile_of({"status": ["lost"] * 5 + ["held"] * 5})
    assert findings(never_matches.RULE, "d = d[d.status == 'lsot']", profile)
"""

from __future__ import annotations

import textwrap
from pathlib import Path
from typing import Any

import pyarrow as pa

from chainlint.engine.check import plan_chains, subject_of
from chainlint.engine.options import Options
from chainlint.engine.run import analyse_source
from chainlint.bind.profiles import ProfileSet
from chainlint.estimate.stores import LoadedStore
from chainlint.parse.source import text_source
from chainlint.profile.build import profile_dataset
from chainlint.profile.settings import Settings
from chainlint.profile.view import Profile
from chainlint.profile.readers import memory_dataset
from chainlint.model import Finding
from chainlint.rules import Rule

#: Where the module and the store of a rule test are said to be (nothing is read there).
FOLDER = Path("/nonexistent/project")


def profile_of(columns: dict[str, list[Any]], name: str = "t", joint: list[dict[str, Any]] | None = None) -> dict[str, Any]:
    """The profile document of a table given by its columns, as `chainlint profile` makes it;
    `joint` (if given) as the profile's joint counts."""
    document = profile_dataset(memory_dataset(pa.table(columns)), name, Settings())
    if joint is not None:
        document["joint"] = joint
    return document


def findings(rule: Rule, source: str, *profiles: dict[str, Any], **options: Any) -> list[Finding]:
    """What `rule` finds in the module `source` whose chains are bound to `profiles`."""
    analysis = analyse_source(text_source(str(FOLDER / "m.py"), textwrap.dedent(source)))
    assert not analysis.errors, analysis.errors
    given = Options(**options)
    return [found for item in plan_chains(analysis.chains, store_of(*profiles), given) for found in rule.check(subject_of(item, given))]


def store_of(*profiles: dict[str, Any]) -> LoadedStore:
    """A loaded store (said to be in FOLDER) holding the profile documents given."""
    views = {document["name"]: Profile.from_document(document) for document in profiles}
    return LoadedStore(ProfileSet(FOLDER / ".chainlint", views))
