"""The verdict of a check, decided once: whether it passes, why, and the exit code.

Every output (exit code, terminal summary, Markdown, HTML, JSON, JUnit, SARIF,
annotations) reads this one `Verdict`, so a green check can never sit beside a red
report. The rules (docs/ci.md, "One verdict"):

- a finding with status "fail" counts; with `strict`, a "warn" counts too (a design lint,
  `checker.lints`, is always a "warn");
- with `fail_on="new"`, a finding counts only when it is not "unchanged" against the
  base (without a base every finding is new);
- an expired waiver always counts; with `strict`, an unused waiver counts too;
- the check passes when nothing counts (exit code 0), and fails otherwise (exit code 1).
"""

from __future__ import annotations

from dataclasses import dataclass

from checker.errors import ConfigError
from checker.findings import Finding, Findings, WaiverNote

FAIL_ON = ("any", "new")


def _plural(count: int, word: str) -> str:
    return f"{count} {word if count == 1 else word + 's'}"


def _verb(count: int, one: str, many: str) -> str:
    return one if count == 1 else many


@dataclass(frozen=True)
class Policy:
    """What fails the check: `--fail-on` and `--strict`."""

    fail_on: str = "any"
    strict: bool = False

    def __post_init__(self) -> None:
        if self.fail_on not in FAIL_ON:
            raise ConfigError(f"`--fail-on {self.fail_on}`: expected one of {', '.join(FAIL_ON)}")

    def counts(self, finding: Finding) -> bool:
        """Whether this finding fails the check under the policy."""
        statuses = ("fail", "warn") if self.strict else ("fail",)
        return finding.status in statuses and not (self.fail_on == "new" and finding.change == "unchanged")

    def counts_note(self, note: WaiverNote) -> bool:
        """Whether this waiver problem fails the check: expired always, unused under --strict."""
        return note.problem == "expired" or self.strict


@dataclass(frozen=True)
class Verdict:
    """The one verdict: `headline` is the sentence every report leads with, `reasons` says what
    fails the check (empty when it passes), `policy` lets a renderer ask which finding counts."""

    passed: bool
    exit_code: int
    headline: str
    reasons: tuple[str, ...]
    policy: Policy = Policy()

    def counts(self, finding: Finding) -> bool:
        return self.policy.counts(finding)

    def counts_note(self, note: WaiverNote) -> bool:
        return self.policy.counts_note(note)


def _reasons(findings: Findings, policy: Policy) -> list[str]:
    """What fails the check, one phrase per kind, most serious first."""
    counted = [f for f in findings.findings if policy.counts(f)]
    fails = sum(1 for f in counted if f.status == "fail")
    lints = sum(1 for f in counted if f.lint)
    warns = len(counted) - fails - lints
    expired = len(findings.expired_waivers)
    unused = len(findings.unused_waivers) if policy.strict else 0
    new = policy.fail_on == "new" and findings.base_ref is not None
    reasons = []
    if fails:
        reasons.append(f"this change adds {_plural(fails, 'failure')}" if new
                       else f"{_plural(fails, 'limit')} {_verb(fails, 'fails', 'fail')}")
    if warns:
        reasons.append(f"{_plural(warns, 'new warning' if new else 'warning')} {_verb(warns, 'fails', 'fail')} "
                       "under --strict")
    if lints:
        reasons.append(f"{_plural(lints, 'new design lint' if new else 'design lint')} "
                       f"{_verb(lints, 'fails', 'fail')} under --strict")
    if expired:
        reasons.append(f"{_plural(expired, 'waiver')} {_verb(expired, 'has', 'have')} expired")
    if unused:
        reasons.append(f"{_plural(unused, 'unused waiver')} {_verb(unused, 'fails', 'fail')} under --strict")
    return reasons


def _passing_headline(findings: Findings, policy: Policy) -> str:
    """Why a passing check passes; old failures that `--fail-on new` lets through are named."""
    statuses = ("fail", "warn") if policy.strict else ("fail",)
    remaining = sum(1 for f in findings.findings if f.status in statuses)
    if remaining:
        return (f"this change adds no failure; {_plural(remaining, 'existing failure')} "
                f"{_verb(remaining, 'remains', 'remain')}")
    limits = findings.limit_findings
    total = len(limits)
    if not total:
        return "no limits to check"
    if sum(1 for f in limits if f.status == "pass") < total:  # warnings or waivers: "all hold" would overstate it
        return "no limit fails"
    return f"all {total} limits hold" if total > 1 else "the 1 limit holds"


def judge(findings: Findings, policy: Policy = Policy()) -> Verdict:
    """The verdict of `findings` under `policy`: the one place that decides pass or fail."""
    reasons = _reasons(findings, policy)
    if reasons:
        return Verdict(passed=False, exit_code=1, headline=reasons[0], reasons=tuple(reasons), policy=policy)
    return Verdict(passed=True, exit_code=0, headline=_passing_headline(findings, policy), reasons=(),
                   policy=policy)
