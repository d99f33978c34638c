"""One options object for a run, built by one function from the configuration and the flags.

Every front end (the command line, the language server, `measure`, the notebook extension)
calls `load_options` and hands the result to the engine explicitly; nothing below reads the
configuration or the current folder on its own.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from chainlint.config import Config, ConfigError, load_config, override
from chainlint.discover import pattern_problem
from chainlint.parse.source import DEFAULT_MAX_BYTES
from chainlint.rules import BY_NAME, DEFAULT, FAILING, RuleContext


@dataclass(frozen=True)
class Options:
    """What a run uses: `rows` scales every chain; `profile_rows` per profile (from the
    configuration) where `rows` is not given; `bindings` the name globs of the configuration;
    `failing` the rules whose findings fail the run; `jobs` the worker processes analysing
    files and `max_bytes` the largest file analysed; `root` the folder report paths are written
    relative to; `config` the configuration they came from (with each value's origin)."""

    store: Path | None = None
    rows: int | None = None
    rules: frozenset[str] = DEFAULT
    failing: frozenset[str] = DEFAULT & FAILING
    context: RuleContext = field(default_factory=RuleContext)
    bindings: tuple[tuple[str, str], ...] = ()
    profile_rows: tuple[tuple[str, int], ...] = ()
    exclude: tuple[str, ...] = ()
    jobs: int | None = None
    max_bytes: int = DEFAULT_MAX_BYTES
    root: Path = Path(".")
    config: Config = field(default_factory=Config, compare=False)


def load_options(start: Path, root: Path, rows: int | None = None, jobs: int | None = None,
                 max_bytes: int = DEFAULT_MAX_BYTES, **flags: Any) -> Options:
    """The options of the configuration nearest to `start`, with the flags given (those not
    None, named as the configuration's keys) over it. Raises ConfigError."""
    config = override(load_config(start, set(BY_NAME)), **flags)
    problem = pattern_problem(config.exclude)
    if problem:
        raise ConfigError(f"--exclude: {problem}")
    return replace(options_from(config, root, rows), jobs=jobs, max_bytes=max_bytes)


def options_from(config: Config, root: Path, rows: int | None = None) -> Options:
    """The options a configuration asks for (flags already laid over it)."""
    rules = (frozenset(config.rules) if config.rules else DEFAULT) - set(config.skip)
    return Options(
        store=Path(config.store) if config.store else None,
        rows=rows,
        rules=rules,
        failing=frozenset(config.fail_rules) if config.fail_rules else rules & FAILING,
        context=RuleContext(min_gain=config.min_gain, min_saving=config.min_saving_ms / 1e3),
        bindings=config.bindings,
        profile_rows=config.rows,
        exclude=config.exclude,
        root=root,
        config=config,
    )
