"""The bundled demo's reports, byte for byte, as recorded in `tests/fixtures/golden/`.

They pin what users and CI integrations read (text lines, the JSON contracts, SARIF, the diff)
while the code behind them changes shape. Re-record a file only in a commit that names the
behaviour change it makes: `python tests/test_demo_outputs.py` writes them afresh.
"""
import os
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
GOLDEN = REPO / "tests" / "fixtures" / "golden"
RUNS = {
    "check.text": ["check", "examples/", "--format", "text"],
    "check.json": ["check", "examples/", "--format", "json"],
    "check.sarif": ["check", "examples/", "--format", "sarif"],
    "check.diff": ["check", "examples/", "--diff"],
    "explain.text": ["explain", "examples/", "--format", "text"],
    "explain.json": ["explain", "examples/", "--format", "json"],
}


def _run(args: list[str]) -> bytes:
    """The command's standard output, run from the repository root as a user would."""
    env = {**os.environ, "COLUMNS": "100"}
    done = subprocess.run([sys.executable, "-m", "chainlint", *args, "--jobs", "1"], cwd=REPO,
                          capture_output=True, env=env, timeout=300)
    assert done.returncode in (0, 1), done.stderr.decode(errors="replace")
    # SARIF names the folder it ran in (`originalUriBaseIds`): the one machine-dependent byte run.
    return done.stdout.replace(REPO.as_uri().encode() + b"/", b"file:///REPO/")


@pytest.mark.parametrize("name", sorted(RUNS))
def test_demo_output_is_unchanged(name: str) -> None:
    assert _run(RUNS[name]) == (GOLDEN / name).read_bytes()


if __name__ == "__main__":
    for name, args in RUNS.items():
        (GOLDEN / name).write_bytes(_run(args))
