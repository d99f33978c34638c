"""The editor set-up that docs/editors.md gives, run in a real headless Neovim.

The Neovim block is taken from the document itself, so the document cannot drift from what
works. Skipped, saying why, where no Neovim 0.11 or newer is on the PATH (CI installs one).
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).parent.parent
DEMO = ROOT / "examples"
BIN = Path(sys.executable).parent


def _nvim() -> str:
    found = shutil.which("nvim", path=f"{BIN}{os.pathsep}{os.environ.get('PATH', '')}")
    if found is None:
        pytest.skip("no `nvim` on the PATH: the Neovim set-up of docs/editors.md is not tried")
    first = subprocess.run([found, "--version"], capture_output=True, text=True, timeout=30).stdout
    version = re.match(r"NVIM v(\d+)\.(\d+)", first)
    if version is None or (int(version[1]), int(version[2])) < (0, 11):
        pytest.skip(f"`{found}` is not Neovim 0.11 or newer ({first.splitlines()[:1]}): not tried")
    return found


def _neovim_block() -> str:
    text = (ROOT / "docs" / "editors.md").read_text(encoding="utf-8")
    section = text.split("## Neovim 0.11 or newer", 1)[1]
    return re.search(r"```lua\n(.*?)```", section, re.S)[1]


HARNESS = """
local ok = vim.wait(90000, function() return #vim.diagnostic.get(0) >= EXPECTED end, 100)
local out = {}
for _, d in ipairs(vim.diagnostic.get(0)) do
  table.insert(out, { line = d.lnum + 1, column = d.col + 1, code = d.code, source = d.source })
end
vim.fn.writefile({ vim.json.encode({ ok = ok, diagnostics = out }) }, OUT)
vim.cmd('qa!')
"""


def test_neovim_builtin_client_shows_the_findings_of_check(tmp_path: Path) -> None:
    nvim = _nvim()
    project = tmp_path / "project"
    project.mkdir()
    shutil.copytree(DEMO / ".chainlint", project / ".chainlint")
    shutil.copy(DEMO / "pipeline.py", project / "pipeline.py")
    env = {**os.environ, "PATH": f"{BIN}{os.pathsep}{os.environ.get('PATH', '')}",
           "XDG_CONFIG_HOME": str(tmp_path / "config"), "XDG_DATA_HOME": str(tmp_path / "data"),
           "XDG_STATE_HOME": str(tmp_path / "state"), "XDG_CACHE_HOME": str(tmp_path / "cache")}
    check = subprocess.run([str(BIN / "chainlint"), "check", "--format", "json", "pipeline.py"],
                           cwd=project, env=env, capture_output=True, text=True, timeout=120)
    expected = sorted((f["line"], f["column"], f["rule"]) for f in json.loads(check.stdout)["findings"])
    assert expected, check.stderr

    (tmp_path / "init.lua").write_text(_neovim_block(), encoding="utf-8")
    out = tmp_path / "diagnostics.json"
    harness = HARNESS.replace("EXPECTED", str(len(expected))).replace("OUT", json.dumps(str(out)))
    (tmp_path / "harness.lua").write_text(harness, encoding="utf-8")
    subprocess.run([nvim, "--headless", "-i", "NONE", "-u", str(tmp_path / "init.lua"), "pipeline.py",
                    "-c", f"luafile {tmp_path / 'harness.lua'}"],
                   cwd=project, env=env, capture_output=True, text=True, timeout=150,
                   stdin=subprocess.DEVNULL)
    result = json.loads(out.read_text())
    assert result["ok"], result
    seen = sorted((d["line"], d["column"], d["code"]) for d in result["diagnostics"])
    assert seen == expected
    assert {d["source"] for d in result["diagnostics"]} == {"chainlint"}
