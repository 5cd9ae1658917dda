"""What ``calibrate`` found: the ``Calibration`` result and its text, markdown and JSON forms.

The answer paragraph it carries comes from ``tabpar.owndata.explanation.compose_answer``.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

from tabpar.common.files import atomic_write_text
from tabpar.common.text import column_places, format_fixed
from tabpar.common.text import format_number as fmt
from tabpar.data.suites import Task
from tabpar.evaluation.placement import Placement
from tabpar.evaluation.probes import findings_lines
from tabpar.execution.provenance import library_versions
from tabpar.models.zoo import DEFAULT_ENSEMBLES, MODELS
from tabpar.owndata.difficulty import EASY_PERCENTILE, HARD_PERCENTILE
from tabpar.owndata.explanation import (
    leakage_headline,
    missing_ensembles,
)
from tabpar.owndata.inference import (
    inferred_items,
    inferred_text,
    rerun_command,
    task_options,
)


def _finite(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _finite(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_finite(v) for v in value]
    return value


def _reference_name(folder) -> str:
    """How the text names the reference the difficulty came from: "reference 'default'"."""
    return f"reference '{Path(folder).name}'" if folder else "suite reference"


# --- the result ----------------------------------------------------------------------------

@dataclass
class Calibration:
    """What ``calibrate`` found; ``str()`` is the text report, ``to_dict()`` the JSON one.

    Scores are in the task metric's units (``lower_is_better`` gives the direction); ``gain_share``
    is (naive − score) / (naive − best) on the loss scale (0 = naive floor, 1 = best default
    ensemble, None when the best default does not beat naive beyond the noise);
    ``difficulty_percentile`` is 0–100, higher = harder than more of the suite's tasks.
    """

    data: str
    task: Task
    out: Path
    inferred: dict
    split: str
    notes: list
    placement: Placement
    score_verdict: str
    dataset: str
    difficulty: float
    difficulty_percentile: float | None
    suite_reference: str | None
    suite_tasks: int
    gain_share: float | None
    par_gain_share: float | None
    baseline: dict  # model → {score, train_score, fit_seconds, seeds}
    diagnostics: list  # of Diagnostic
    answer: str
    n_holdout: int
    n_train: int
    seeds: int
    skipped: list = field(default_factory=list)
    failures: list = field(default_factory=list)
    warnings: list = field(default_factory=list)
    given: list = field(default_factory=list)  # ["--score", "0.8"] or ["--predictions", FILE]
    budget_seconds: float | None = None
    elapsed_seconds: float = 0.0
    files: dict = field(default_factory=dict)
    # an answer given before the whole zoo and the diagnostics have run is not final: it
    # rests on the models in ``baseline``; ``pending`` models and diagnostics are still running
    final: bool = True
    pending: list = field(default_factory=list)
    diagnostics_pending: list = field(default_factory=list)

    def to_dict(self) -> dict:
        """JSON-safe: numbers that are not finite become None."""
        p = self.placement
        return _finite(json.loads(json.dumps({
            "data": self.data, "target": self.task.target, "task": self.task.definition(),
            "options": task_options(self.task), "out": str(self.out),
            "inferred": self.inferred, "split": self.split, "notes": self.notes,
            "n_train": self.n_train, "n_holdout": self.n_holdout, "metric": p.metric,
            "lower_is_better": p.lower_is_better, "score": p.score, "paired": p.paired,
            "score_verdict": self.score_verdict, "verdict_message": p.message,
            "verdict_provisional": self.provisional, "verdict_rests_on": self.ensembles_run,
            "gain_share": self.gain_share, "gain_share_note": p.gain_share_note, "par_gain_share": self.par_gain_share,
            "noise": p.noise, "naive": p.naive, "par": p.par, "par_model": p.par_model,
            "best": p.best, "best_model": p.best_model, "baseline": self.baseline,
            "seeds": self.seeds, "dataset": self.dataset, "difficulty": self.difficulty,
            "difficulty_percentile": self.difficulty_percentile,
            "suite_reference": self.suite_reference, "suite_tasks": self.suite_tasks,
            "diagnostics": [d.to_dict() for d in self.diagnostics], "answer": self.answer,
            "skipped": self.skipped, "failures": self.failures, "warnings": self.warnings,
            "budget_seconds": self.budget_seconds, "elapsed_seconds": self.elapsed_seconds,
            "files": self.files, "findings": [f.to_dict() for f in p.findings],
            "final": self.final, "rests_on": self.rests_on, "pending": self.pending,
            "diagnostics_pending": self.diagnostics_pending,
        }, default=str)))

    @property
    def ensembles_run(self) -> list[str]:
        """The default ensembles the verdict rests on."""
        return [m for m in DEFAULT_ENSEMBLES if m in self.baseline]

    @property
    def rests_on(self) -> list[str]:
        """Every model the answer rests on (the naive floor first, then cheapest first)."""
        return sorted(self.baseline, key=lambda m: MODELS[m].cost(self.task.type))

    @property
    def provisional(self) -> bool:
        """True when the verdict rests on fewer than every default ensemble (and could change
        once they run, or once the missing ones are run); worse-than-naive never depends on
        them. An answer that is not ``final`` says so apart (its ``pending`` models)."""
        return (bool(missing_ensembles(self.ensembles_run))
                and self.score_verdict != "worse-than-naive")

    def still_running(self) -> str:
        """What a non-final answer waits for, in words: "rf, et and the 5 diagnostics"."""
        parts = list(self.pending) + ([f"the {len(self.diagnostics_pending)} diagnostics"]
                                      if self.diagnostics_pending else [])
        return (", ".join(parts[:-1]) + " and " + parts[-1]) if len(parts) > 1 else "".join(parts)

    def diagnostic(self, name: str):
        """The ``Diagnostic`` called ``name`` (e.g. ``"learning-curve"``), or None."""
        return next((d for d in self.diagnostics if d.name == name), None)

    # files -----------------------------------------------------------------------------
    def write_reports(self) -> None:
        """Write ``report.md`` and ``report.json`` (with the library versions) into ``out``."""
        atomic_write_text(self.out / "report.md", self.markdown())
        atomic_write_text(self.out / "report.json", json.dumps(
            {**self.to_dict(), "versions": library_versions()}, indent=2))

    def add_files(self, files: dict) -> None:
        """Record files written for this calibration (key → path), e.g. its plots, and rewrite
        the reports, which list every file."""
        run = self.files.pop("run", None)
        self.files.update({key: str(path) for key, path in files.items()})
        if run is not None:  # the text report names the run folder apart, after the others
            self.files["run"] = run
        self.write_reports()

    # text forms ------------------------------------------------------------------------
    def _baseline_lines(self) -> list[str]:
        p = self.placement
        sign = 1 if p.lower_is_better else -1
        rows = sorted(self.baseline.items(), key=lambda kv: sign * kv[1]["score"])
        lines = [f"  {'model':<8} {'holdout':>12} {'train':>12} {'fit s':>8}"]
        # one number of decimals for the whole table, so its numbers line up and compare
        places = column_places([v for _, s in rows for v in (s["score"], s["train_score"])])
        for model, s in rows:
            tag = ("  (floor)" if model == "naive" else "  (linear)" if model == "linear"
                   else "  best" if model == p.best_model else "")
            lines.append(f"  {model:<8} {format_fixed(s['score'], places):>12} "
                         f"{format_fixed(s['train_score'], places):>12} "
                         f"{s['fit_seconds']:>8.2f}{tag}")
        for s in self.skipped:
            lines.append(f"  {s['model']:<8} {'skipped':>12}   (budget; estimated "
                         f"{s['estimate_seconds']:.0f} s)")
        return lines

    def _placement_lines(self) -> list[str]:
        """The verdict, its numbers and the dataset's difficulty."""
        p = self.placement
        gain_share = "n/a" if self.gain_share is None else f"{self.gain_share:.2f}"
        par = "" if self.par_gain_share is None else f" (par's gain share {self.par_gain_share:.2f})"
        pct = ("n/a" if self.difficulty_percentile is None
               else f"{self.difficulty_percentile:.0f}")
        return [f"score {fmt(p.score)}  →  {self.score_verdict}" + (
                    f" (provisional: rests on {len(self.ensembles_run)} of "
                    f"{len(DEFAULT_ENSEMBLES)} default ensembles)" if self.provisional else ""),
                f"  gain share {gain_share}{par} · noise ±{fmt(p.noise, 3)} (95% bootstrap over the "
                f"{self.n_holdout:,} holdout rows{', paired with your predictions' if p.paired else ''})",
                *findings_lines(p.findings, heading="probes on your predictions" if p.paired
                                else "checks on your score"),
                f"dataset: {self.dataset} — difficulty {self.difficulty:.2f} (1 − headroom the "
                f"best default takes), "
                + (f"percentile {pct} among the {self.suite_tasks} tasks of the "
                   f"{_reference_name(self.suite_reference)} (hard ≥ {HARD_PERCENTILE:.0f}, easy ≤ {EASY_PERCENTILE:.0f})"
                   if self.suite_tasks else "no suite reference to place it against")]

    def _provisional_text(self) -> str:
        """A non-final answer: labelled with what it rests on and what is still running."""
        lines = [f"Provisional (rests on {', '.join(self.rests_on)}; {self.still_running()} "
                 f"still running):"]
        lines += self._placement_lines()
        lines += ["", f"baseline on your split so far ({self.seeds} seed"
                      f"{'s' if self.seeds > 1 else ''} per model):"]
        lines += self._baseline_lines()
        lines += [f"  {m:<8} {'running':>12}" for m in self.pending]
        if self.diagnostics_pending:
            lines += ["", f"diagnostics: still running ({', '.join(self.diagnostics_pending)})"]
        lines += ["", f"answer: {self.answer}"]
        lines += [f"caution: {w}" for w in self.warnings]
        return "\n".join(lines)

    def __str__(self) -> str:
        if not self.final:
            return self._provisional_text()
        p = self.placement
        direction = "lower is better" if p.lower_is_better else "higher is better"
        lines = [f"tabpar calibrate — {Path(self.data).name}, target '{self.task.target}' "
                 f"({self.task.type}, {p.metric}: {direction})",
                 "inferred (check these):" + (" nothing, every option was given"
                                              if not self.inferred else "")]
        lines += [f"  {item}" for item in inferred_items(self.inferred)]
        lines += [f"split: {self.split}"]
        lines += [f"note: {n}" for n in self.notes]
        lines += [""]
        leak = leakage_headline(self.diagnostic("leakage"))
        if leak:
            lines += [f"[!] {leak}"]
        lines += self._placement_lines()
        lines += ["",
                  f"baseline on your split ({self.seeds} seed{'s' if self.seeds > 1 else ''} "
                  f"per model; the suite's procedure):"]
        lines += self._baseline_lines()
        lines += ["", "diagnostics ([!] = look at this):"]
        lines += [f"  {d}" for d in self.diagnostics]
        lines += ["", f"answer: {self.answer}"]
        for w in self.warnings:
            lines.append(f"caution: {w}")
        if self.files:
            lines += ["", f"wrote {', '.join(self.files[k] for k in self.files if k != 'run')}; "
                          f"jobs in {self.files.get('run')}"]
        lines.append(f"rerun with nothing inferred: {rerun_command(self.data, self.task, self.given)}")
        return "\n".join(lines)

    def markdown(self) -> str:
        p = self.placement
        gain_share = "n/a" if self.gain_share is None else f"{self.gain_share:.2f}"
        pct = ("n/a" if self.difficulty_percentile is None
               else f"{self.difficulty_percentile:.0f}")
        out = [f"# Calibration: {Path(self.data).name} → `{self.task.target}`", "",
               f"- **score**: {p.metric} {fmt(p.score)} "
               f"({'lower' if p.lower_is_better else 'higher'} is better) → "
               f"**{self.score_verdict}**"
               + (" (provisional: rests on " + ", ".join(self.ensembles_run) + ")"
                  if self.provisional else ""),
               f"- **dataset**: **{self.dataset}** (difficulty {self.difficulty:.2f}, "
               f"percentile {pct} among {self.suite_tasks} suite tasks)",
               f"- **gain share**: {gain_share}; noise ±{fmt(p.noise, 3)} (95% bootstrap over "
               f"{self.n_holdout:,} holdout rows)",
               f"- **split**: {self.split}",
               f"- **inferred**: {inferred_text(self.inferred)}", "",
               "## Answer", "", self.answer, "",
               *([f"## Probes on your predictions ({len(p.findings)} finding"
                  f"{'s' if len(p.findings) > 1 else ''}, most decisive first)", ""]
                 + [f"- **{f.probe}**: {f.sentence}" for f in p.findings] + [""]
                 if p.findings else []),
               "## Baseline on your split", "",
               "| model | holdout | train | fit s |", "|---|---:|---:|---:|"]
        sign = 1 if p.lower_is_better else -1
        for model, s in sorted(self.baseline.items(), key=lambda kv: sign * kv[1]["score"]):
            out.append(f"| {model} | {fmt(s['score'])} | {fmt(s['train_score'])} | "
                       f"{s['fit_seconds']:.2f} |")
        for s in self.skipped:
            out.append(f"| {s['model']} | skipped (budget) | | ~{s['estimate_seconds']:.0f} |")
        out += ["", "## Diagnostics", ""]
        for d in self.diagnostics:
            out.append(f"- **{d.name}** {'⚠ flagged' if d.flag else 'ok'}: {d.sentence}")
        if self.warnings:
            out += ["", "## Cautions", ""] + [f"- {w}" for w in self.warnings]
        out += ["", "## Files", ""]
        out += [f"- {k}: `{v}`" for k, v in self.files.items()]
        out += ["", "Rerun with nothing inferred:", "", "```",
                rerun_command(self.data, self.task, self.given), "```", ""]
        return "\n".join(out)
