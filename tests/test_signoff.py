"""Sign-off: a reviewer's decision recorded, shown on the page, carried into the group
tables, leaving the group statistics, and stale once the recording's inputs change."""
import datetime

import pandas as pd
import pytest

from heschl.cli import main
from heschl.errors import InputDataError
from heschl.group import group_summary
from heschl.signoff import COLUMNS, decisions_path, read_decisions


def _group_tables(study):
    folder = study.output / "group"
    read = dict(sep="\t", na_values=["n/a"], keep_default_na=False)
    return (pd.read_csv(folder / "features.tsv", **read), pd.read_csv(folder / "qc.tsv", **read),
            pd.read_csv(folder / "summary.tsv", **read))


def _summary_row(summary, feature, scope):
    row = summary.loc[(summary["paradigm"] == "oddball") & (summary["feature"] == feature)
                      & (summary["scope"] == scope)]
    assert len(row) == 1
    return row.iloc[0]


def _page(study, stem):
    return next(study.output.glob(f"*/eeg/{stem}_review.html")).read_text(encoding="utf-8")


def test_round_trip_exclude_rerun_then_change_input(study_copy, capsys, monkeypatch):
    from heschl.batch import run_study

    study = study_copy
    monkeypatch.chdir(study.root)
    features, qc, summary = _group_tables(study)
    group = qc.loc[qc["participant_id"] == "sub-A01", "group"].iloc[0]
    feature = features.loc[features["paradigm"] == "oddball", "feature"].iloc[0]
    before = _summary_row(summary, feature, "alder")
    assert before["n_reviewer_excluded"] == 0

    assert main(["decide", "study.toml", "sub-A01", "oddball", "exclude", "--by", "AB",
                 "--why", "drift through the second half"]) == 0
    assert "recorded in derivatives/heschl/group/decisions.tsv" in capsys.readouterr().out
    summaries = run_study(study, jobs=1)
    redrawn = [s["participant_id"] + " " + s["paradigm"] for s in summaries if s.get("page_redrawn")]
    assert redrawn == ["sub-A01 oddball"]  # only the page whose sign-off changed is drawn again
    assert all(s["status"] == "unchanged" for s in summaries)

    features, qc, summary = _group_tables(study)
    mine = features.loc[(features["participant_id"] == "sub-A01") & (features["paradigm"] == "oddball")]
    assert len(mine) and set(mine["decision"]) == {"exclude"}
    assert set(mine["decision_reason"]) == {"drift through the second half"}
    row = qc.loc[(qc["participant_id"] == "sub-A01") & (qc["paradigm"] == "oddball")].iloc[0]
    assert (row["decision"], row["decision_state"], row["reviewer"]) == ("exclude", "current", "AB")
    after = _summary_row(summary, feature, "alder")
    assert after["n_reviewer_excluded"] == 1
    assert after[f"n_{group}"] == before[f"n_{group}"] - 1 and after[f"mean_{group}"] != before[f"mean_{group}"]
    page = _page(study, "sub-A01_task-oddball")
    assert "drift through the second half" in page and "AB" in page

    # The recording's input changes: it is processed again and its decision is stale.
    markers = study.root / "raw" / "alder" / "sub-A01" / "sub-A01_task-oddball_eeg.vmrk"
    markers.write_text(markers.read_text(encoding="utf-8") + "; a note added by the site\n", encoding="utf-8")
    summaries = run_study(study, jobs=1)
    assert [s["participant_id"] for s in summaries if s["status"] == "done"] == ["sub-A01"]
    features, qc, summary = _group_tables(study)
    row = qc.loc[(qc["participant_id"] == "sub-A01") & (qc["paradigm"] == "oddball")].iloc[0]
    assert row["decision_state"] == "stale" and pd.isna(row["decision"])
    assert _summary_row(summary, feature, "alder")["n_reviewer_excluded"] == 0
    assert _summary_row(summary, feature, "alder")[f"n_{group}"] == before[f"n_{group}"]
    assert "stale" in _page(study, "sub-A01_task-oddball").lower()

    # Confirming the decision on the new inputs makes it count again.
    assert main(["decide", "study.toml", "sub-A01", "oddball", "exclude", "--by", "AB",
                 "--why", "drift through the second half"]) == 0
    run_study(study, jobs=1)
    _, qc, summary = _group_tables(study)
    assert qc.loc[(qc["participant_id"] == "sub-A01") & (qc["paradigm"] == "oddball"),
                  "decision_state"].iloc[0] == "current"
    assert _summary_row(summary, feature, "alder")["n_reviewer_excluded"] == 1


def test_decide_names_problems_in_one_line(study_copy, capsys, monkeypatch):
    monkeypatch.chdir(study_copy.root)
    assert main(["decide", "study.toml", "sub-Z99", "oddball", "include", "--by", "AB"]) == 1
    err = capsys.readouterr().err.strip()
    assert err == ("heschl: study.toml: no recording of sub-Z99 for paradigm oddball; check the participant id "
                   "and paradigm (heschl check lists the recordings).")
    assert main(["decide", "study.toml", "sub-A01", "oddball", "exclude", "--by", "AB"]) == 1
    assert "an exclusion without a comment; say why in the comment column" in capsys.readouterr().err
    assert not decisions_path(study_copy.output).exists()  # nothing half-written


def _write(path, rows):
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("\n".join("\t".join(r) for r in rows) + "\n", encoding="utf-8")


GOOD = ["sub-A01", "alder", "oddball", "exclude", "noisy", "AB", "2026-12-01", "abc"]


@pytest.mark.parametrize("row, message", [
    (["sub-A01", "alder", "oddball", "exlcude", "noisy", "AB", "2026-12-01", "abc"],
     'decision "exlcude" is not one of include, exclude (did you mean "exclude"?)'),
    (["sub-A01", "alder", "oddball", "exclude", "", "AB", "2026-12-01", "abc"], "an exclusion without a comment"),
    (["sub-A01", "alder", "oddball", "include", "", "A B", "2026-12-01", "abc"], 'reviewer "A B" is not initials'),
    (["sub-A01", "alder", "oddball", "include", "", "AB", "1.12.2026", "abc"], 'decided_on "1.12.2026" is not a date'),
    (["sub-A01", "alder", "oddball", "include", "", "AB", "2026-12-01"], "has 7 cells for 8 columns"),
])
def test_hand_edited_decisions_are_checked(tmp_path, row, message, monkeypatch):
    monkeypatch.chdir(tmp_path)
    _write(decisions_path(tmp_path), [list(COLUMNS), row])
    with pytest.raises(InputDataError) as info:
        read_decisions(tmp_path)
    assert str(info.value).startswith("group/decisions.tsv, line 2: " + message), str(info.value)


def test_decisions_file_round_trips(tmp_path):
    _write(decisions_path(tmp_path), [list(COLUMNS), GOOD])
    assert read_decisions(tmp_path) == {("alder", "sub-A01", "oddball"): dict(zip(COLUMNS, GOOD))}
    datetime.date.fromisoformat(GOOD[6])


def test_reviewer_exclusion_leaves_group_statistics():
    """Hand-made table: the excluded recording drops out of n and mean, and is counted."""
    rows = [("sub-1", "control", 1.0, None), ("sub-2", "control", 3.0, None), ("sub-3", "control", 100.0, "exclude"),
            ("sub-4", "patient", 5.0, None), ("sub-5", "patient", 7.0, None)]
    table = pd.DataFrame([{"participant_id": p, "site": "s", "group": g, "paradigm": "p", "feature": "f",
                           "unit": "uV", "value": v, "flags": "", "decision": d} for p, g, v, d in rows])
    summary = group_summary(table, groups=("control", "patient"), reference="control")
    pooled = summary.loc[summary["scope"] == "pooled"].iloc[0]
    assert pooled["n_control"] == 2 and pooled["mean_control"] == 2.0
    assert pooled["n_reviewer_excluded"] == 1 and pooled["n_excluded"] == 0 and pooled["n_missing"] == 0
    assert pooled["difference"] == 4.0
