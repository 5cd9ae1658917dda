"""Leaderboards a user brings: import, validation, storage, ranking, and placement against them.

Every leaderboard here is a synthetic stand-in written by the test (invented entry names and
scores), small enough to rank by hand. The rank is checked against scipy.stats.rankdata
(method="min", competition ranking) and the percentile against scipy.stats.percentileofscore
(kind="mean", ties count half).
"""
from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from tabpar.cli.main import main
from tabpar.common.errors import UserError
from tabpar.leaderboards.placing import LEADERBOARD_KEYS, place, place_on_leaderboard
from tabpar.leaderboards.store import (
    import_leaderboard,
    list_leaderboards,
    load_leaderboard,
    sanitise_name,
)

# synthetic, hand-checkable entries: a tie at 0.20
ENTRIES = [0.30, 0.10, 0.20, 0.20]


@pytest.fixture
def store(tmp_path, monkeypatch):
    """An empty leaderboard store, also set as $TABPAR_LEADERBOARDS (what `place` reads)."""
    folder = tmp_path / "store"
    monkeypatch.setenv("TABPAR_LEADERBOARDS", str(folder))
    return folder


def write_csv(path, scores, column="score"):
    """A synthetic leaderboard file: invented entry names, the given scores, one extra column."""
    frame = pd.DataFrame({"entry": [f"synthetic-{i}" for i in range(len(scores))],
                          column: scores, "notes": ["made up"] * len(scores)})
    frame.to_csv(path, index=False)
    return path


def board_of(tmp_path, store, scores, lower: bool, name="hand"):
    path = write_csv(tmp_path / f"{name}.csv", scores)
    return import_leaderboard(path, task="synthetic-task", score_column="score",
                              lower_is_better=lower, name=name, store=store)


# --- ranking arithmetic -------------------------------------------------------------------
@pytest.mark.parametrize("lower, score, rank, beats", [
    # lower is better: sorted best first 0.10, 0.20, 0.20, 0.30
    (True, 0.20, 2, 50.0),    # tie: shares place 2 with both 0.20s; beats 0.30, ties half twice
    (True, 0.05, 1, 100.0),   # better than every entry
    (True, 0.50, 5, 0.0),     # worse than every entry: last of the 5
    (True, 0.15, 2, 75.0),
    # higher is better: sorted best first 0.30, 0.20, 0.20, 0.10
    (False, 0.20, 2, 50.0),   # beats 0.10, ties half twice
    (False, 0.35, 1, 100.0),
    (False, 0.00, 5, 0.0),
    (False, 0.30, 1, 87.5),   # ties the best entry: shares place 1
])
def test_rank_and_percentile_by_hand_and_against_scipy(tmp_path, store, lower, score, rank,
                                                      beats):
    board = board_of(tmp_path, store, ENTRIES, lower)
    got = place_on_leaderboard(score, board)
    assert got["leaderboard_rank"] == rank  # by hand, above
    assert got["leaderboard_size"] == len(ENTRIES) + 1  # the entries plus the placed score
    assert got["leaderboard_entries"] == len(ENTRIES)
    assert got["top_percent"] == pytest.approx(100 * rank / (len(ENTRIES) + 1))
    assert got["leaderboard_percentile"] == pytest.approx(beats)
    sign = 1 if lower else -1
    # reference: scipy.stats.rankdata(method="min") on the better-first ordering = competition
    # ranking (equal scores share the better place)
    assert got["leaderboard_rank"] == stats.rankdata(sign * np.append(ENTRIES, score),
                                                     method="min")[-1]
    # reference: scipy.stats.percentileofscore(kind="mean") counts ties half; negated for a
    # loss so that "beats" means "lower"
    assert got["leaderboard_percentile"] == pytest.approx(
        stats.percentileofscore(-sign * np.array(ENTRIES), -sign * score, kind="mean"))


def test_ranking_matches_scipy_on_a_larger_board_with_many_ties(tmp_path, store):
    rng = np.random.default_rng(7)
    scores = np.round(rng.normal(0.8, 0.05, 200), 2)  # synthetic, rounded so ties are common
    board = board_of(tmp_path, store, scores.tolist(), lower=False, name="big")
    for score in [scores[0], scores[17], 0.5, 1.2, 0.8]:
        got = place_on_leaderboard(score, board)
        # reference: scipy.stats.rankdata(method="min"), higher is better
        assert got["leaderboard_rank"] == stats.rankdata(-np.append(scores, score),
                                                         method="min")[-1]
        # reference: scipy.stats.percentileofscore(kind="mean")
        assert got["leaderboard_percentile"] == pytest.approx(
            stats.percentileofscore(scores, score, kind="mean"))


def test_place_on_leaderboard_takes_a_stored_name_and_rejects_a_non_finite_score(tmp_path,
                                                                                  store):
    board_of(tmp_path, store, ENTRIES, lower=True, name="by-name")
    assert place_on_leaderboard(0.2, "by-name", store=store)["leaderboard_rank"] == 2
    with pytest.raises(UserError, match="not a finite number"):
        place_on_leaderboard(float("nan"), "by-name", store=store)


# --- import: what is stored -----------------------------------------------------------------
def test_import_keeps_other_columns_and_writes_provenance(tmp_path, store):
    path = write_csv(tmp_path / "scores.csv", [0.14, 0.16, 0.15], column="rmsle")
    board = import_leaderboard(path, task="ames", score_column="rmsle", store=store)
    assert board.name == "scores" and board.lower_is_better and board.metric == "rmsle"
    meta = json.loads((store / "scores.json").read_text())
    stored = pd.read_parquet(store / meta["entries_file"])
    pd.testing.assert_frame_equal(stored, pd.read_csv(path))  # every column as it came
    assert meta["task"] == "ames" and meta["n_entries"] == 3
    assert meta["direction_from"] == "the metric of suite task 'ames' (rmsle)"
    assert meta["source"]["file"] == str(path.resolve())
    assert meta["source"]["bytes"] == path.stat().st_size
    assert not list(store.glob(".*.tmp"))  # atomic writes leave no temporary files
    assert load_leaderboard("scores", store).scores.tolist() == [0.14, 0.16, 0.15]


def test_import_reads_parquet(tmp_path, store):
    path = tmp_path / "entries.parquet"
    pd.DataFrame({"who": ["synthetic-x", "synthetic-y"], "auc": [0.81, 0.79]}).to_parquet(path)
    board = import_leaderboard(path, task="loans", score_column="auc", store=store)
    assert board.metric == "roc_auc" and not board.lower_is_better  # loans is scored on AUC


def test_direction_rules(tmp_path, store):
    path = write_csv(tmp_path / "d.csv", [1.0, 2.0])
    with pytest.raises(UserError, match="--lower-is-better or --higher-is-better"):
        import_leaderboard(path, task="not-a-suite-task", score_column="score", store=store)
    board = import_leaderboard(path, task="not-a-suite-task", score_column="score",
                               lower_is_better=False, store=store)
    assert board.metric is None and not board.lower_is_better
    # a flag against a known task's metric: stored, but the metric is not claimed
    board = import_leaderboard(path, task="ames", score_column="score", lower_is_better=False,
                               name="d2", store=store)
    assert board.metric is None


def test_names_are_sanitised_and_stay_inside_the_store(tmp_path, store):
    path = write_csv(tmp_path / "n.csv", [1.0, 2.0])
    outside = tmp_path.parent  # this test's folder and its neighbours

    def listing():
        return {p.relative_to(outside) for p in outside.rglob("*")}

    before_outside = listing()
    board = import_leaderboard(path, task="t", score_column="score", lower_is_better=True,
                               name="../../my board (v2)/x", store=store)
    assert board.name == "my-board-v2-x"
    assert board.path.parent == store.resolve()
    assert sanitise_name("a.b_c-d") == "a.b_c-d"
    with pytest.raises(UserError, match="no letters or digits"):
        sanitise_name("../..")
    created = listing() - before_outside
    assert created and all(str(p).startswith(f"{tmp_path.name}/store") for p in created)


def test_existing_name_needs_replace(tmp_path, store):
    path = write_csv(tmp_path / "r.csv", [1.0, 2.0])
    import_leaderboard(path, task="t", score_column="score", lower_is_better=True, store=store)
    with pytest.raises(UserError, match="--replace"):
        import_leaderboard(path, task="t", score_column="score", lower_is_better=True,
                           store=store)
    import_leaderboard(path, task="t", score_column="score", lower_is_better=True, store=store,
                       replace=True)


def test_tampered_entries_are_refused(tmp_path, store):
    board_of(tmp_path, store, ENTRIES, lower=True, name="t1")
    entries_file = json.loads((store / "t1.json").read_text())["entries_file"]
    pd.DataFrame({"score": [9.0, 9.5]}).to_parquet(store / entries_file)
    with pytest.raises(UserError, match="do not match its meta file"):
        load_leaderboard("t1", store)


def test_unknown_name_lists_the_stored_ones(tmp_path, store):
    board_of(tmp_path, store, ENTRIES, lower=True, name="present")
    with pytest.raises(UserError, match="stored ones are present"):
        load_leaderboard("absent", store)


def test_list_shows_stored_leaderboards(tmp_path, store, capsys):
    board_of(tmp_path, store, ENTRIES, lower=True, name="one")
    names = [row["name"] for row in list_leaderboards(store) if row["where"] == str(store)]
    assert names == ["one"]
    assert main(["leaderboard", "list", "--store", str(store)]) == 0
    out = capsys.readouterr().out
    assert "one" in out and "synthetic-task" in out and str(store) in out


# (mistakes in an imported file -> one sentence, exit 2, nothing stored: the cases
# 'leaderboard-import-*' of the bad-input matrix, tests/test_bad_input.py)


def test_import_cli_prints_what_it_stored(tmp_path, store, capsys):
    path = write_csv(tmp_path / "cli.csv", [0.2, 0.1, 0.3])
    assert main(["leaderboard", "import", str(path), "--task", "synthetic-task",
                 "--score-column", "score", "--lower-is-better", "--store", str(store),
                 "--name", "cli board"]) == 0
    out = capsys.readouterr().out
    assert "stored leaderboard 'cli-board'" in out and "3 entries" in out
    assert "became 'cli-board'" in out


# --- placement with a leaderboard -----------------------------------------------------------
@pytest.fixture
def ames_board(tmp_path, store):
    """A synthetic rmsle leaderboard for the ames task (invented entries)."""
    path = write_csv(tmp_path / "ames.csv", [0.131, 0.140, 0.150, 0.150, 0.162, 0.176, 0.189,
                                             0.210], column="rmsle")
    return import_leaderboard(path, task="ames", score_column="rmsle", name="ames-synthetic",
                              store=store)


def test_place_cli_json_has_the_leaderboard_keys(ames_board, capsys):
    code = main(["place", "ames", "--score", "0.15", "--reference", "quick", "--suite",
                 "quick", "--leaderboard", ames_board.name, "--json"])
    assert code == 0
    answer = json.loads(capsys.readouterr().out)
    assert set(LEADERBOARD_KEYS) <= set(answer)
    # by hand: 0.131 and 0.140 are better, 0.150 ties -> place 3 of 8 entries + the score
    assert answer["leaderboard_rank"] == 3 and answer["leaderboard_size"] == 9
    assert answer["top_percent"] == pytest.approx(100 * 3 / 9)
    assert answer["leaderboard_percentile"] == pytest.approx(100 * (4 + 0.5 * 2) / 8)
    assert answer["verdict"]  # the reference placement is in the same answer


def test_place_text_and_plot_show_both(ames_board, tmp_path):
    from tabpar.report.plots import placement_plot, save_figure

    placement = place("ames", score=0.15, suite="quick", reference="quick",
                      leaderboard=ames_board)
    text = str(placement)
    assert "rank 3 of 9 (top 33.3%)" in text and "beats 62.5% of its 8 entries" in text
    assert "leaderboard caution" in text  # few entries; split not recorded
    fig = placement_plot(placement, leaderboard=ames_board)
    assert len(fig.axes) == 2  # the reference panel and the leaderboard panel
    assert save_figure(fig, tmp_path / "both.png").stat().st_size > 0


def test_place_refuses_a_leaderboard_of_another_task_or_direction(tmp_path, store):
    other = write_csv(tmp_path / "other.csv", [0.1, 0.2])
    import_leaderboard(other, task="diamonds", score_column="score", name="other-task",
                       store=store)
    with pytest.raises(UserError, match="is for task 'diamonds', not 'ames'"):
        place("ames", score=0.15, suite="quick", reference="quick", leaderboard="other-task")
    import_leaderboard(other, task="ames", score_column="score", lower_is_better=False,
                       name="wrong-way", store=store)
    with pytest.raises(UserError, match="another metric"):
        place("ames", score=0.15, suite="quick", reference="quick", leaderboard="wrong-way")


def test_leaderboard_place_cli_alone(tmp_path, store, capsys):
    board_of(tmp_path, store, ENTRIES, lower=True, name="alone")
    assert main(["leaderboard", "place", "alone", "--score", "0.2", "--store", str(store),
                 "--json"]) == 0
    answer = json.loads(capsys.readouterr().out)
    assert answer["leaderboard_rank"] == 2 and answer["leaderboard_percentile"] == 50.0
