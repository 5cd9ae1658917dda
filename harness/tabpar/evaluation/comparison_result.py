"""What ``tabpar compare`` found: one ``TaskComparison`` per task and the ``Comparison`` that
prints itself (text, markdown, JSON, a data frame, an HTML table).

Deltas are unit-free and direction-normalised (positive = the candidate is better): the
candidate's gain over the baseline as a share of the baseline's gain over the naive floor.
"""
from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import pandas as pd

from tabpar.common.text import count_of, format_p, html_table
from tabpar.evaluation.stats import smallest_signed_rank_p

DEFAULT_MODELS = ("rf", "lgbm")  # the models a comparison runs unless told otherwise
ALPHA = 0.05  # family-wise error rate of the per-task calls, and the suite-wide test's level


@dataclass
class TaskComparison:
    task: str
    delta: float | None  # candidate's gain over baseline / baseline's gain over naive
    low: float | None  # 95% band
    high: float | None
    p_value: float | None  # two-sided, before correction
    p_holm: float | None
    call: str  # better | same | worse | error | n/a
    metric: str = ""
    baseline_score: float | None = None  # mean over models and seeds, metric units
    candidate_score: float | None = None
    leakage: str | None = None
    note: str = ""
    se: float | None = None  # standard error of delta (bootstrap and seed parts combined)


@dataclass
class Comparison:
    candidate: str
    baseline: str
    suite: str
    aa: bool
    models: list
    seeds: int
    tolerance: float
    tasks: list
    wins: int
    ties: int
    losses: int
    median_delta: float | None
    p_value: float | None  # Wilcoxon signed-rank over task deltas
    regression: bool
    reasons: list = field(default_factory=list)
    leakage: list = field(default_factory=list)
    out: str = ""
    reused_baseline_jobs: int = 0

    @property
    def passed(self) -> bool:
        return not self.regression and not self.leakage

    @property
    def reach_note(self) -> str:
        """A warning when too few tasks were compared for the suite-wide test to ever reach
        significance ("" otherwise)."""
        n = sum(t.delta is not None for t in self.tasks)
        smallest = smallest_signed_rank_p(n)
        if smallest < ALPHA:
            return ""
        return (f"with {count_of(n, 'task')} the smallest p the signed-rank test can reach is "
                f"{smallest:g}, so it cannot flag a suite-wide change at {ALPHA:g}; only the "
                f"per-task calls can (compare at least 6 tasks for a suite-wide test)")

    def to_dict(self) -> dict:
        d = asdict(self)
        d["passed"] = self.passed
        d["reach_note"] = self.reach_note
        return d

    def to_frame(self) -> pd.DataFrame:
        """One row per task: delta (positive = the candidate is better), its 95% band, p-values
        and the call."""
        import pandas as pd
        return pd.DataFrame([asdict(t) for t in self.tasks])

    def _repr_html_(self) -> str:
        summary = {k: v for k, v in self.to_dict().items() if k != "tasks"}
        return (html_table(summary, caption=f"{self.candidate} vs {self.baseline}")
                + self.to_frame().to_html(index=False, escape=True))

    def __str__(self) -> str:
        head = (f"compare {self.candidate} against {self.baseline} on suite '{self.suite}'"
                f"{' (A/A: same procedure, other seeds)' if self.aa else ''}; models "
                f"{', '.join(self.models)} × {self.seeds} seeds")
        lines = [head, f"  {'task':<14}{'delta':>9}  {'95% band':<21}{'p (Holm)':>10}  call"]
        for t in self.tasks:
            if t.delta is None:
                lines.append(f"  {t.task:<14}{'-':>9}  {'':<21}{'':>10}  {t.call}: {t.note}")
                continue
            band = f"[{t.low:+.3f}, {t.high:+.3f}]"
            flag = "  LEAKAGE" if t.leakage else ""
            lines.append(f"  {t.task:<14}{t.delta:>+9.3f}  {band:<21}{format_p(t.p_holm):>10}  "
                         f"{t.call}{flag}")
        med = "n/a" if self.median_delta is None else f"{self.median_delta:+.3f}"
        lines.append(f"  wins {self.wins} · ties {self.ties} · losses {self.losses} · median "
                     f"delta {med} · Wilcoxon p {format_p(self.p_value)}")
        if self.reach_note:
            lines.append(f"  {self.reach_note}")
        if self.reused_baseline_jobs:
            lines.append(f"  baseline: {count_of(self.reused_baseline_jobs, 'job')} reused from "
                         f"the published reference '{self.suite}' (same data, code and "
                         f"library versions), the rest run now")
        lines.append("  delta: the candidate's gain over the baseline as a share of the "
                     "baseline's gain over the naive floor (positive = better).")
        for item in self.leakage:
            lines.append(f"  leakage guard: {item}")
        verdict = ("REGRESSION: " + "; ".join(self.reasons) if self.regression else
                   "no regression beyond the noise")
        lines.append(f"  {verdict}" + ("" if not self.leakage else
                                       " — but the leakage guard failed (see above)"))
        if self.out:
            lines.append(f"  report: {self.out}/report.md, {self.out}/report.json")
        return "\n".join(lines)

    def to_markdown(self) -> str:
        rows = ["| task | delta | 95% band | p (Holm) | call |", "|---|---|---|---|---|"]
        for t in self.tasks:
            if t.delta is None:
                rows.append(f"| {t.task} | – | – | – | {t.call}: {t.note} |")
            else:
                rows.append(f"| {t.task} | {t.delta:+.3f} | [{t.low:+.3f}, {t.high:+.3f}] | "
                            f"{format_p(t.p_holm)} | {t.call}{' (leakage)' if t.leakage else ''} |")
        text = str(self).splitlines()
        summary = next(i for i, line in enumerate(text) if line.startswith("  wins "))
        return "\n".join([f"# tabpar compare: {self.candidate} vs {self.baseline}", "",
                          text[0], ""] + rows + [""] + [line.strip() for line in text[summary:]]
                         ) + "\n"
