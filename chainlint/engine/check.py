"""The main job: analyse files, bind each chain to a profile, plan it, and apply the rules."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

from chainlint.bind.binding import Binding, bind_chain
from chainlint.engine.options import Options
from chainlint.estimate.selectivity import Estimator
from chainlint.estimate.stores import LoadedStore, LoadedStores
from chainlint.model import Chain, FileAnalysis, FileProblem, Finding
from chainlint.plan.chains import ChainPlan, plan_chain
from chainlint.profile.sites import chain_site
from chainlint.profile.store import find_store
from chainlint.rules import RULES, RuleContext, Subject


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
    """Findings, and those a `# chainlint: keep` comment suppressed (counted, not hidden);
    `root` is the folder the run's report paths are relative to."""

    chains: tuple[PlannedChain, ...]
    findings: tuple[Finding, ...]
    errors: tuple[FileProblem, ...]
    files: int
    suppressed: tuple[Finding, ...] = ()
    root: Path = Path(".")


def plan_results(results: Sequence[FileAnalysis], options: Options,
                 stores: LoadedStores | None = None) -> tuple[list[PlannedChain], list[FileProblem]]:
    """Bind and plan every chain; store and configuration problems become located errors.

    `stores` may be kept by a caller that plans again (the editor, after each change): a store
    whose files did not change is not read again, nor its estimators made again."""
    planned: list[PlannedChain] = []
    errors: dict[tuple[str, int, int, str], FileProblem] = {}  # each store's problems once, however many files read it
    stores = LoadedStores() if stores is None else stores
    for result in results:
        if not result.chains:
            continue
        loaded = stores.load((options.store or find_store(Path(result.path))).resolve())
        for error in loaded.errors:
            errors.setdefault((error.path, error.line, error.column, error.message), error)
        planned.extend(plan_chains(result.chains, loaded, options))
    return planned, list(errors.values())


def plan_chains(chains: Sequence[Chain], loaded: LoadedStore, options: Options) -> list[PlannedChain]:
    """Bind each chain to a profile of the loaded store and, when bound, plan it."""
    planned = []
    store = loaded.profiles.store
    for chain in chains:
        binding = bind_chain(chain, loaded.profiles, options.bindings)
        if binding.profile is None:
            planned.append(PlannedChain(chain, binding, store=store))
            continue
        estimator = loaded.estimator(binding.profile)
        configured = dict(options.profile_rows).get(binding.profile)
        rows = options.rows or configured
        rows_from = "option" if options.rows else "configuration" if configured else "profile"
        plan = keep_written(plan_chain(chain, binding, estimator, rows, loaded.model, rows_from), options.context)
        planned.append(PlannedChain(chain, binding, plan, estimator, store))
    return planned


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
    # Rules that hold back order advice run first (a stable sort keeps the others' order).
    rules = sorted((rule for rule in RULES if rule.name in options.rules), key=lambda rule: not rule.holds_order)
    for item in planned:
        keep = item.chain.keep
        subject = subject_of(item, options)
        for rule in rules:
            for finding in rule.check(subject):
                kept = keep is not None and (not keep or finding.rule in keep)
                (suppressed if kept else findings).append(finding)
                # An order planned around a misspelt literal would be advice built on the typo
                # (and a fix that moves it first): the chain is planned once the literal is fixed.
                if rule.holds_order and not kept:
                    subject = replace(subject, held=True)
    return sorted(findings, key=finding_order), sorted(suppressed, key=finding_order)


def subject_of(item: PlannedChain, options: Options) -> Subject:
    """What the rules see of one planned chain."""
    site = chain_site(item.chain, item.store.parent if item.store else options.root)
    return Subject(item.chain, item.binding, item.plan, item.estimator, site, options.context)


def error_order(error: FileProblem) -> tuple[str, int, int]:
    """How errors are listed: by path and position."""
    return (error.path, error.line, error.column)


def finding_order(finding: Finding) -> tuple[str, int, int, str]:
    """How findings are listed: by path, position, then rule."""
    return (finding.path, finding.span.line, finding.span.column, finding.rule)


def check(results: Sequence[FileAnalysis], options: Options, errors: Sequence[FileProblem] = (),
          stores: LoadedStores | None = None) -> CheckResult:
    """The main job over analysed files; `errors` (of discovery, say) join the result's;
    `stores` as for `plan_results`."""
    planned, store_errors = plan_results(results, options, stores)
    file_errors = [*errors, *(e for r in results for e in r.errors)]
    findings, suppressed = apply_rules(planned, options)
    return CheckResult(tuple(planned), tuple(findings), tuple(file_errors + store_errors), len(results), tuple(suppressed),
                       options.root)
