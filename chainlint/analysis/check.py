"""The main job: analyse files, bind each chain to a profile, plan it, and apply the rules."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

from chainlint.bind.binding import Binding, bind_chain
from chainlint.config import Config
from chainlint.estimate.selectivity import Estimator
from chainlint.estimate.stores import LoadedStores
from chainlint.model import Chain, FileAnalysis, FileProblem, Finding
from chainlint.plan.chains import ChainPlan, plan_chain
from chainlint.profile.sites import chain_site
from chainlint.profile.store import find_store
from chainlint.rules import (
    CATALOG,
    RuleContext,
    joint_uncounted,
    missing_profile,
    never_matches,
    reorder,
    stale_joint,
    unbound,
    unknown_column,
)

#: Rule names, and whether each runs unless asked otherwise.
RULES = {module.NAME: module.NAME != unbound.NAME for module in CATALOG}
#: The rules whose findings fail a run unless `fail_rules` says otherwise (notes only inform).
FAILING = frozenset(module.NAME for module in CATALOG if getattr(module, "FAILS", True))


@dataclass(frozen=True)
class Options:
    """What a run uses: `rows` scales every chain; `profile_rows` per profile (from the
    configuration) where `rows` is not given; `bindings` the name globs of the configuration."""

    store: Path | None = None
    rows: int | None = None
    rules: frozenset[str] = frozenset(name for name, on in RULES.items() if on)
    context: RuleContext = field(default_factory=RuleContext)
    bindings: tuple[tuple[str, str], ...] = ()
    profile_rows: tuple[tuple[str, int], ...] = ()


def options_from(config: Config) -> Options:
    """The options a configuration asks for (the command line has already been laid over it)."""
    rules = frozenset(config.rules) if config.rules else Options().rules
    return Options(
        store=Path(config.store) if config.store else None,
        rules=rules - set(config.skip),
        context=RuleContext(min_gain=config.min_gain, min_saving=config.min_saving_ms / 1e3),
        bindings=config.bindings,
        profile_rows=config.rows,
    )


@dataclass(frozen=True)
class PlannedChain:
    """A chain, its binding, and (when bound) its plan and the estimator of its profile."""

    chain: Chain
    binding: Binding
    plan: ChainPlan | None = None
    estimator: Estimator | None = field(default=None, compare=False, repr=False)
    store: Path | None = None


@dataclass(frozen=True)
class CheckResult:
    """Findings, and those a `# chainlint: keep` comment suppressed (counted, not hidden)."""

    chains: tuple[PlannedChain, ...]
    findings: tuple[Finding, ...]
    errors: tuple[FileProblem, ...]
    files: int
    suppressed: tuple[Finding, ...] = ()


def plan_results(results: Sequence[FileAnalysis], options: Options,
                 stores: LoadedStores | None = None) -> tuple[list[PlannedChain], list[FileProblem]]:
    """Bind and plan every chain; store and configuration problems become located errors.

    `stores` may be kept by a caller that plans again (the editor, after each change): a store
    whose files did not change is not read again, nor its estimators made again."""
    planned: list[PlannedChain] = []
    errors: dict[str, FileProblem] = {}
    stores = LoadedStores() if stores is None else stores
    for result in results:
        if not result.chains:
            continue
        store = (options.store or find_store(Path(result.path))).resolve()
        loaded = stores.load(store)
        profiles = loaded.profiles
        for error in loaded.errors:
            errors.setdefault(error.message, error)
        for chain in result.chains:
            binding = bind_chain(chain, profiles, options.bindings)
            if binding.profile is None:
                planned.append(PlannedChain(chain, binding, store=store))
                continue
            estimator = loaded.estimator(binding.profile)
            configured = dict(options.profile_rows).get(binding.profile)
            rows = options.rows or configured
            rows_from = "option" if options.rows else "configuration" if configured else "profile"
            plan = keep_written(plan_chain(chain, binding, estimator, rows, loaded.model, rows_from), options.context)
            planned.append(PlannedChain(chain, binding, plan, estimator, store))
    return planned, list(errors.values())


def keep_written(plan: ChainPlan, context: RuleContext) -> ChainPlan:
    """The written order stays the plan unless the planned one clears the thresholds under the
    cost model in force: an order already applied does not flip on a small change of the model
    (a recalibration on another machine) or of the estimates."""
    if plan.as_written or (
            plan.speedup >= context.min_gain and plan.written_seconds - plan.planned_seconds >= context.min_saving):
        return plan
    return replace(plan, planned=plan.written)


def apply_rules(planned: Sequence[PlannedChain], options: Options) -> tuple[list[Finding], list[Finding]]:
    """(findings, suppressed findings), each in path and position order."""
    findings: list[Finding] = []
    suppressed: list[Finding] = []
    for item in planned:
        found: list[Finding] = []
        if unbound.NAME in options.rules:
            found.extend(unbound.check(item.chain, item.binding))
        if missing_profile.NAME in options.rules:
            found.extend(missing_profile.check(item.chain, item.binding))
        keep = item.chain.keep
        if item.plan is not None and item.estimator is not None:
            typos = never_matches.check(item.plan, item.estimator) if never_matches.NAME in options.rules else []
            found.extend(typos)
            # An order planned around a misspelt literal would be advice built on the typo
            # (and a fix that moves it first): the chain is planned once the literal is fixed.
            held = bool(typos) and not (keep is not None and (not keep or never_matches.NAME in keep))
            if reorder.NAME in options.rules and not held:
                found.extend(reorder.check(item.plan, options.context))
            if unknown_column.NAME in options.rules:
                found.extend(unknown_column.check(item.plan, item.estimator))
            site = chain_site(item.chain, item.store.parent if item.store else Path.cwd())
            if stale_joint.NAME in options.rules:
                found.extend(stale_joint.check(item.plan, item.estimator, site))
            if joint_uncounted.NAME in options.rules:
                found.extend(joint_uncounted.check(item.plan, item.estimator, site))
        for finding in found:
            (suppressed if keep is not None and (not keep or finding.rule in keep) else findings).append(finding)

    def order(f: Finding) -> tuple[str, int, int, str]:
        return (f.path, f.span.line, f.span.column, f.rule)

    return sorted(findings, key=order), sorted(suppressed, key=order)


def check(results: Sequence[FileAnalysis], options: Options) -> CheckResult:
    planned, errors = plan_results(results, options)
    file_errors = [e for r in results for e in r.errors]
    findings, suppressed = apply_rules(planned, options)
    return CheckResult(tuple(planned), tuple(findings), tuple(file_errors + errors), len(results), tuple(suppressed))
