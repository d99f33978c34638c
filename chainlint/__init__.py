"""chainlint: keep every chain of pandas row filters in a cheap, result-preserving order."""

from chainlint.version import __version__

__all__ = ["__version__", "load_ipython_extension"]


def load_ipython_extension(ipython):  # type: ignore[no-untyped-def]
    """`%load_ext chainlint`: the `%%chainlint` cell magic (needs the `notebook` extra)."""
    from chainlint.notebook.magic import load

    load(ipython)
