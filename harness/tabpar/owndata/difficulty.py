"""How hard the user's dataset is for the baseline, placed among the published reference's tasks."""
from __future__ import annotations

from pathlib import Path

from tabpar.common.errors import UserError
from tabpar.evaluation.reference import Reference

HARD_PERCENTILE = 75.0  # difficulty percentile from which a dataset is called hard
EASY_PERCENTILE = 25.0


MIN_SAME_TYPE = 5  # fewer tasks of the user's type than this: place among every task


def suite_difficulties(reference: str = "default", task_type: str | None = None
                       ) -> tuple[dict | None, str | None, str]:
    """(task → difficulty, the reference folder, a note) for the published reference, falling
    back to ``quick`` while ``reference`` is missing or incomplete.

    Parameters
    ----------
    reference : str
        A published reference's name (or folder).
    task_type : str, optional
        The user's task type: the dataset is placed among the reference's tasks of that type
        (difficulty is measured on each type's own metric scale), unless it has fewer than
        ``MIN_SAME_TYPE`` of them.

    Returns
    -------
    (dict or None, str or None, str)
        Each task's difficulty (0–1, 1 − the share of the headroom the best default takes:
        higher = harder), the folder it came from, and a note saying what was used instead
        ("" when ``reference`` itself was used as asked); None, None and the reason when no
        reference is available.
    """
    tried = []
    for name in dict.fromkeys([reference, "quick"]):
        try:
            ref = Reference(name)
            if not (Path(ref.folder) / "provenance.json").exists():
                raise UserError(f"the reference {ref.folder} is incomplete (no provenance.json)")
        except UserError as exc:
            tried.append(f"the '{name}' reference is not available ({str(exc).rstrip('.')})")
            continue
        notes = ([] if not tried else [f"{tried[0]}; difficulty is placed among the "
                                       f"'{name}' reference's tasks instead"])
        difficulties = ref.difficulties()
        if task_type is not None:
            types = {t: info.get("type") for t, info in ref.meta.get("tasks", {}).items()
                     if isinstance(info, dict)}
            same = {t: d for t, d in difficulties.items() if types.get(t) == task_type}
            if len(same) >= MIN_SAME_TYPE:
                difficulties = same
            else:
                notes.append(f"the '{name}' reference has {len(same)} {task_type} task"
                             f"{'' if len(same) == 1 else 's'} (fewer than {MIN_SAME_TYPE}), so "
                             f"the dataset's difficulty is placed among all "
                             f"{len(difficulties)} of its tasks, whose metrics differ")
        return difficulties, str(ref.folder), "; ".join(notes)
    return None, None, "; ".join(tried) + "; the dataset's difficulty cannot be placed"


def dataset_label(percentile: float | None) -> str:
    """hard (≥ 75), easy (≤ 25), else typical; 'unknown' without a suite reference.

    Parameters
    ----------
    percentile : float or None
        The task's difficulty percentile among the suite's tasks (0–100, higher = harder).

    Returns
    -------
    str
        ``"hard"``, ``"easy"``, ``"typical"`` or ``"unknown"``.
    """
    if percentile is None:
        return "unknown"
    if percentile >= HARD_PERCENTILE:
        return "hard"
    if percentile <= EASY_PERCENTILE:
        return "easy"
    return "typical"
