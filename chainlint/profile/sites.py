"""How a profile names the chains whose filters it counted together."""

from __future__ import annotations

from pathlib import Path

from chainlint.model import Chain


def chain_site(chain: Chain, root: Path) -> str:
    """`path:frame` of a chain, the path relative to the project root: how a profile remembers
    which chains it counted, so that `check` tells a changed chain from one never counted."""
    path = Path(chain.path).resolve()
    try:
        shown = path.relative_to(root.resolve()).as_posix()
    except ValueError:
        shown = path.as_posix()
    return f"{shown}:{chain.frame}"
