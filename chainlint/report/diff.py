"""`check --diff`: the fixes as a unified diff, one file after another."""

from __future__ import annotations

import difflib
import os
from pathlib import Path

from chainlint.report.escape import printable
from chainlint.rewrite.fixes import FileFix


def unified_diff(fix: FileFix, root: Path) -> str:
    """The rewrite as a unified diff, its headers naming the file relative to `root`."""
    assert fix.source is not None and fix.new_text is not None
    name = printable(os.path.relpath(fix.path, root))
    return "".join(
        difflib.unified_diff(
            fix.source.text.splitlines(keepends=True),
            fix.new_text.splitlines(keepends=True),
            fromfile=f"a/{name}",
            tofile=f"b/{name}",
        )
    )
