"""End to end on the synthetic study: outputs, ground-truth recovery, QC, resume."""
import json

import numpy as np
import pandas as pd
import pytest

from heschl.batch import run_study
from heschl.outputs import FEATURE_COLUMNS, recording_paths
from heschl.inputs import discover
from heschl.pages import CAUTION
from heschl.synth.artefacts import blink_course


@pytest.fixture(scope="module")
def group(processed_study):
    study, _ = processed_study
    return pd.read_csv(study.output / "group" / "features.tsv", sep="\t")


@pytest.fixture(scope="module")
def truth(processed_study):
    study, _ = processed_study
    return json.loads((study.root / "truth.json").read_text())


def _value(group, feature):
    return group[group.feature == feature].set_index("participant_id")


def test_every_recording_is_processed_and_written(processed_study):
    study, summaries = processed_study
    assert len(summaries) == 19 and all(s["status"] == "done" for s in summaries), summaries
    for recording in discover(study):
        paths = recording_paths(study.output, recording)
        assert all(p.is_file() for p in paths.values()), recording
        table = pd.read_csv(paths["features"], sep="\t")
        assert list(table.columns) == FEATURE_COLUMNS
    description = json.loads((study.output / "dataset_description.json").read_text())
    assert description["DatasetType"] == "derivative" and description["GeneratedBy"][0]["Name"] == "heschl"
    assert not list(study.output.rglob(".*.tmp-*")), "temporary files left behind"


def test_group_table_has_site_and_group_columns(group):
    assert {"participant_id", "site", "group", "paradigm", "feature", "value", "unit"} <= set(group.columns)
    assert set(group.site) == {"alder", "birch", "cedar", "dogwood"}
    assert set(group.group) == {"control", "comparison"}


def test_comparison_mismatch_is_smaller_than_control(group):
    # Ground truth of the synthetic scenario (docs/SCENARIO.md): about 40 % smaller mismatch.
    mmn = _value(group, "mismatch_mean_amplitude")
    control = mmn[mmn.group == "control"].value.mean()
    comparison = mmn[mmn.group == "comparison"].value.mean()
    assert control < 0 and comparison < 0
    assert abs(comparison) < abs(control)


def test_eyes_closed_alpha_exceeds_eyes_open_in_every_recording(group):
    # Berger effect (docs/REFERENCES.md F15): posterior alpha larger with eyes closed.
    closed = _value(group, "band_power_alpha_eyes_closed_posterior").value
    opened = _value(group, "band_power_alpha_eyes_open_posterior").value
    assert len(closed) == 6
    assert (closed > opened).all()
    assert (_value(group, "alpha_reactivity").value > 1).all()


def test_itpc_during_trains_is_high_in_controls_and_above_prestimulus(group):
    during = _value(group, "itpc_40")
    before = _value(group, "itpc_40_prestimulus").value
    controls = during[during.group == "control"]
    assert (controls.value > 0.3).all()
    # "Clearly above": in controls at least twice the pre-stimulus value, and in every
    # recording more than 0.1 above it; with ~40 trials the null ITPC of one channel is
    # about sqrt(pi/(4N)) = 0.14 (docs/REFERENCES.md F2), and averaging over the region lowers it.
    assert (controls.value > 2 * before[controls.index]).all()
    assert (during.value - before > 0.1).all()


def test_the_low_count_recording_is_flagged_with_its_reason(processed_study, truth):
    study, _ = processed_study
    low = [t for t in truth["recordings"] if t["low_count_condition"]]
    assert len(low) == 1
    t = low[0]
    recording = next(r for r in discover(study)
                     if r.participant_id == t["participant_id"] and r.paradigm == t["paradigm"])
    qc = json.loads(recording_paths(study.output, recording)["qc"].read_text())
    assert qc["verdict"] == "unusable"
    flag = next(f for f in qc["flags"] if f["code"] == "too-few-trials")
    assert flag["message"].startswith("deviant:") and "below the minimum 30" in flag["message"]
    assert "dropped: adaptive" in flag["message"]  # the reason: adaptive rejection dropped them
    table = pd.read_csv(recording_paths(study.output, recording)["features"], sep="\t", keep_default_na=False)
    assert table.loc[table.feature == "mismatch_mean_amplitude", "flags"].item().startswith("deviant:")


def test_bad_channels_are_found(processed_study, truth):
    study, _ = processed_study
    found_true = found = true = 0
    for t in truth["recordings"]:
        recording = next(r for r in discover(study)
                         if r.participant_id == t["participant_id"] and r.paradigm == t["paradigm"])
        qc = json.loads(recording_paths(study.output, recording)["qc"].read_text())
        flagged = set(qc["channels"]["bad"])
        injected = {b["standard_name"] for b in t["bad_channels"]}
        found_true += len(flagged & injected)
        found += len(flagged)
        true += len(injected)
    assert found_true / true >= 0.9 and found_true / found >= 0.8


def test_provenance_records_inputs_definitions_versions_and_filter(processed_study):
    study, _ = processed_study
    recording = discover(study)[0]
    prov = json.loads(recording_paths(study.output, recording)["provenance"].read_text())
    assert all(len(h) == 64 for h in prov["inputs_sha256"].values())
    assert {"paradigm", "feature_sets", "site"} <= set(prov["definitions"])
    assert prov["versions"]["heschl"] and prov["versions"]["mne"]
    # docs/REFERENCES.md F26 (Picton et al. 2000): filter type, cut-offs and their definition,
    # causality, sampling rate, reference, artefact criteria, trials after rejection.
    filt = prov["steps"]["clean"]["filter"]
    assert {"type", "low_cutoff_hz", "high_cutoff_hz", "cutoff_definition", "causality",
            "sampling_rate_hz"} <= set(filt)
    assert prov["steps"]["clean"]["reference"]["reference"] == "average"
    assert prov["steps"]["rejection"]["method"] in ("adaptive", "fixed")
    assert all("kept" in c for c in prov["steps"]["rejection"]["trials"].values())


def test_pages_are_self_contained_and_carry_the_caution(processed_study):
    study, _ = processed_study
    pages = sorted(study.output.rglob("*_review.html")) + [study.output / "group" / "review.html"]
    assert len(pages) == 20
    for page in pages:
        html = page.read_text()
        assert CAUTION in html
        assert "http://" not in html and "https://" not in html
        assert "<script src" not in html and "<link" not in html  # nothing loaded from elsewhere
        if page.parent.name != "group":
            assert "<script" not in html  # recording pages need no script; the study page sorts its table


def test_second_run_resumes_and_redoes_only_what_changed(study_copy):
    recordings = discover(study_copy)
    victim = recording_paths(study_copy.output, recordings[3])
    victim["provenance"].unlink()  # as if the run had crashed before finishing it
    next(study_copy.output.rglob(f"{recordings[5].stem}_desc-*.nc")).unlink()  # an array lost
    summaries = run_study(study_copy, jobs=1)
    statuses = [s["status"] for s in summaries]
    assert statuses.count("done") == 2 and statuses[3] == statuses[5] == "done"
    assert statuses.count("unchanged") == len(recordings) - 2
    assert victim["provenance"].is_file()


def test_one_bad_file_does_not_stop_the_study(study_copy):
    recordings = discover(study_copy)
    broken = recordings[0].path
    broken.write_bytes(b"not a recording")
    summaries = run_study(study_copy, jobs=1)  # the changed file is retried, the rest are up to date
    failed = [s for s in summaries if s["status"] == "failed"]
    assert len(failed) == 1 and failed[0]["error"].count("\n") == 0
    assert broken.name in failed[0]["error"]
    assert sum(s["status"] == "unchanged" for s in summaries) == len(recordings) - 1
    page = (study_copy.output / "group" / "review.html").read_text()
    assert "Recordings that failed" in page


def test_default_cleaning_brings_the_mismatch_closer_to_truth_than_no_cleaning(processed_study, truth, tmp_path):
    """Issue acceptance: mismatch error against the generator's truth, default vs no cleaning."""
    from heschl.config import load_study

    study, _ = processed_study  # read only: the uncleaned run writes under tmp_path
    text = (config_dir() / "oddball.toml").read_text()
    for old, new in (('method = "adaptive"', 'method = "none"'), ("detection_high_pass = 1.0", ""),
                     ("max_cluster = 3", ""), ('bad_channels = "detect"', 'bad_channels = "keep"'),
                     ('line_noise = "notch"', 'line_noise = "none"')):
        text = text.replace(old, new)
    (tmp_path / "oddball-uncleaned.toml").write_text(text)
    study_text = (study.root / "study.toml").read_text()
    study_text = study_text.replace('paradigm = "oddball"', f'paradigm = "{tmp_path / "oddball-uncleaned.toml"}"')
    study_text = study_text.replace('output = "derivatives/heschl"', f'output = "{tmp_path / "out"}"')
    study_text = study_text.replace('participants = "participants.tsv"',
                                    f'participants = "{study.root / "participants.tsv"}"')
    (tmp_path / "study.toml").write_text(_oddball_only(study_text, study.root))
    run_study(load_study(tmp_path / "study.toml"), jobs=2)
    expected = {t["participant_id"]: t["expected"]["mismatch_mean_amplitude_uv"]
                for t in truth["recordings"] if t["paradigm"] == "oddball" and t["modality"] == "eeg"}

    def error(folder):
        table = pd.read_csv(folder / "group" / "features.tsv", sep="\t")
        mmn = table[table.feature == "mismatch_mean_amplitude"].set_index("participant_id").value
        return float(np.mean([abs(mmn[p] - expected[p]) for p in expected]))

    cleaned, uncleaned = error(study.output), error(tmp_path / "out")
    print(f"mean |error| of the mismatch amplitude: default cleaning {cleaned:.3f} uV, none {uncleaned:.3f} uV")
    assert cleaned < uncleaned


def config_dir():
    from heschl.config import builtin_dir

    return builtin_dir("paradigms")


def _oddball_only(text, root):
    """The study text with only the oddball analysis and absolute file patterns."""
    import re

    text = re.sub(r"\[\[analyses\]\]\nparadigm = \"(clicktrain|rest)\"\nfeature_sets = \[[^\]]*\]\n\n?", "", text)
    text = re.sub(r"\n(clicktrain|rest) = \"[^\"]*\"", "", text)
    text = re.sub(r"\[sites\.\w+\.markers\.(clicktrain|rest)\]\n(\"[^\n]*\n)+\n?", "", text)
    return re.sub(r'(oddball = ")(raw/)', lambda m: m.group(1) + str(root) + "/" + m.group(2), text)


@pytest.mark.parametrize("feature, sign", [
    ("mismatch_mean_amplitude", +1),   # smaller (less negative) mismatch in the comparison group
    ("itpc_40", -1),                   # lower 40 Hz phase coherence
    ("ppc_40", -1),
    ("band_power_theta_eyes_closed_posterior", +1),  # slightly more theta at rest
    ("band_power_gamma_eyes_closed_posterior", +1),  # slightly more gamma
    ("band_power_beta_eyes_closed_posterior", -1),   # less beta
    ("band_power_theta_eyes_open_posterior", +1),
    ("band_power_gamma_eyes_open_posterior", +1),
    ("band_power_beta_eyes_open_posterior", -1),
])
def test_group_effects_of_the_scenario_have_the_right_sign(group, feature, sign):
    # Ground truth of the synthetic scenario (docs/SCENARIO.md), invented values.
    rows = _value(group, feature)
    difference = rows[rows.group == "comparison"].value.mean() - rows[rows.group == "control"].value.mean()
    assert np.sign(difference) == sign, (feature, difference)


def test_mismatch_inverts_at_the_mastoids_under_average_reference(group):
    # docs/REFERENCES.md F19 (Naatanen et al. 2007): negative fronto-centrally, positive at mastoids.
    assert (_value(group, "mismatch_mean_amplitude").value < 0).all()
    assert (_value(group, "mismatch_mean_amplitude_mastoid").value > 0).all()


def test_group_summary_reports_effect_sizes_per_site_and_pooled(processed_study):
    study, _ = processed_study
    summary = pd.read_csv(study.output / "group" / "summary.tsv", sep="\t")
    mmn = summary[(summary.feature == "mismatch_mean_amplitude")].set_index("scope")
    assert set(mmn.index) == {"alder", "birch", "cedar", "pooled"}
    assert mmn.loc["pooled", "n_control"] == 3
    # The low-count recording's flagged mismatch is left out of the group statistics.
    assert mmn.loc["pooled", "n_excluded"] == 1 and mmn.loc["pooled", "n_comparison"] == 2
    assert mmn.loc["pooled", "difference"] > 0 and np.isfinite(mmn.loc["pooled", "g"])
    assert "Hedges" in (study.output / "group" / "review.html").read_text()


def test_a_new_feature_of_an_existing_kind_needs_only_toml(processed_study, tmp_path):
    """A P3a window measure added in a feature-set file, with no code change."""
    from dataclasses import replace

    from heschl.config import load_feature_set
    from heschl.pipeline import process_recording

    study, _ = processed_study
    (tmp_path / "p3a.toml").write_text(
        'name = "p3a-extra"\nparadigm = "oddball"\n[regions]\ncentral = ["FCz", "Cz", "CP1", "CP2"]\n'
        '[[measures]]\nname = "p3a_central"\nkind = "mean-amplitude"\nsignal = "mismatch"\n'
        'region = "central"\nwindow = [0.25, 0.35]\n')
    analysis = next(a for a in study.analyses if a.paradigm.name == "oddball")
    extra = load_feature_set(tmp_path / "p3a.toml", analysis.paradigm)
    changed = replace(study, analyses=(replace(analysis, feature_sets=analysis.feature_sets + (extra,)),))
    recording = next(r for r in discover(study) if r.paradigm == "oddball")
    rows = {r["feature"]: r for r in process_recording(changed, recording)["rows"]}
    assert rows["p3a_central"]["feature_set"] == "p3a-extra" and rows["p3a_central"]["unit"] == "uV"
    assert np.isfinite(rows["p3a_central"]["value"]) and rows["p3a_central"]["n_trials"] > 30


def test_outputs_open_with_the_readme_snippets_in_a_fresh_interpreter(processed_study):
    import subprocess
    import sys

    study, _ = processed_study
    waveforms = next(study.output.rglob("*task-oddball_desc-waveforms_erp.nc"))
    csd = next(study.output.rglob("*task-rest_desc-csd_csd.nc"))
    code = f"""
import pandas as pd
features = pd.read_csv({str(study.output / "group" / "features.tsv")!r}, sep="\\t")
import xarray as xr
ds = xr.open_dataset({str(waveforms)!r})
assert {{"signal", "channel", "time"}} <= set(ds.dims), ds.dims
assert ds["average"].attrs["units"] == "V" and ds["time"].attrs["units"] == "s"
assert "mismatch" in list(ds["signal"].values) and ds.attrs["participant_id"].startswith("sub-")
assert len(ds.attrs["input_key"]) == 64
c = xr.open_dataset({str(csd)!r})
m = c["real"].values + 1j * c["imag"].values
assert abs(m - m.conj().swapaxes(-1, -2)).max() <= 1e-12 * abs(m).max()  # Hermitian (docs/REFERENCES.md F37)
assert {{"ci_low", "ci_high", "se", "reliability"}} <= set(features.columns)
print("ok")
"""
    done = subprocess.run([sys.executable, "-W", "error", "-c", code], capture_output=True, text=True)
    assert done.stdout.strip() == "ok", done.stderr


def test_blinks_are_removed_from_kept_epochs(processed_study, truth):
    """Issue acceptance: residual correlation of kept epochs with the blink source < 0.2."""
    from heschl.clean import clean
    from heschl.harmonise import harmonise, read_raw
    from heschl.pipeline import _segment_and_reject

    study, _ = processed_study
    t = next(t for t in truth["recordings"] if t["paradigm"] == "oddball" and len(t["blinks_s"]) >= 10
             and not t["low_count_condition"])
    recording = next(r for r in discover(study) if r.participant_id == t["participant_id"]
                     and r.paradigm == "oddball")
    paradigm = study.analyses[0].paradigm
    site = study.sites[recording.site]
    raw, markers, record = harmonise(read_raw(recording.path), site, paradigm, study.common_channels, "x")
    # The same cleaning without the ocular step, to show the blinks are there before it.
    import dataclasses

    plain = dataclasses.replace(paradigm, cleaning=dataclasses.replace(paradigm.cleaning, ocular="none"))
    uncorrected = raw.copy()
    clean(uncorrected, plain, where="x", restored=record["restored_reference"], line_frequency=site.line_frequency)
    cleaning = clean(raw, paradigm, where="x", restored=record["restored_reference"],
                     line_frequency=site.line_frequency)
    data, times, entries, ch_names, _, _ = _segment_and_reject(raw, markers, paradigm, cleaning)
    sfreq = raw.info["sfreq"]
    course = blink_course(t["blinks_s"], raw.n_times, sfreq)
    fp1 = ch_names.index("Fp1")

    def kept_correlation():
        eeg, blink = [], []
        for condition in paradigm.conditions:
            kept = [e for e in entries if e["condition"] == condition and e["kept"]]
            for entry, trial in zip(kept, data[condition]):
                first = int(round(entry["onset_s"] * sfreq)) + int(round(times[0] * sfreq))
                eeg.append(trial[fp1])
                blink.append(course[first:first + len(times)])
        return abs(np.corrcoef(np.concatenate(eeg), np.concatenate(blink))[0, 1])

    after = kept_correlation()
    # The source is real: in the continuous Fp1 cleaned without the ocular step the blinks
    # dominate; the default ocular correction (ICA) then removes them.
    before = abs(np.corrcoef(uncorrected.get_data(picks=["Fp1"])[0], course)[0, 1])
    print(f"blink source correlation at Fp1: continuous {before:.2f}, kept epochs {after:.2f}")
    assert before > 0.5
    assert after < 0.2


def test_mastoid_inversion_is_a_qc_metric(processed_study):
    # docs/REFERENCES.md F19: under the average reference the mismatch inverts at the mastoids.
    study, _ = processed_study
    for recording in discover(study):
        if recording.paradigm != "oddball" or recording.datatype != "eeg":
            continue  # MEG has no mastoid electrodes
        qc = json.loads(recording_paths(study.output, recording)["qc"].read_text())
        inversion = qc["mastoid_inversion"]["mismatch"]
        assert inversion["mastoids"] == ["TP9", "TP10"] and inversion["window_s"] == [0.1, 0.25]
        assert inversion["region_uv"] < 0 < inversion["mastoid_uv"] and inversion["inverted"]


def test_coherence_is_derived_from_the_cross_spectra(processed_study):
    import xarray as xr

    study, _ = processed_study
    with xr.open_dataset(next(study.output.rglob("*task-rest_desc-csd_csd.nc"))) as ds:
        s = ds["real"].values + 1j * ds["imag"].values
        diag = np.einsum("...ii->...i", s).real
        expected = np.abs(s) ** 2 / (diag[..., :, None] * diag[..., None, :])
        np.testing.assert_allclose(ds["coherence"].values, expected, rtol=1e-10)
        assert ds["coherence"].attrs["units"] == "1"
        np.testing.assert_allclose(np.einsum("...ii->...i", ds["coherence"].values), 1.0)


def test_recordings_without_eog_carry_a_flag_and_those_with_eog_count_kept_blinks(processed_study, truth):
    """Issue acceptance: a recording without EOG gets ocular handling or a clear flag saying why not."""
    # Since the two-generator evaluation (DEVELOPERS.md) the default is ICA for every EEG
    # recording; only the MEG recording is left to rejection and counts its kept blinks.
    study, _ = processed_study
    for recording in discover(study):
        qc = json.loads(recording_paths(study.output, recording)["qc"].read_text())
        codes = {f["code"]: f for f in qc["flags"]}
        if not qc["channels"]["eog"]:  # Alder and Birch record no EOG: ICA by component properties
            prov = json.loads(recording_paths(study.output, recording)["provenance"].read_text())
            ica = prov["steps"]["clean"]["ocular"]["ica"]
            assert ica["selection"] == "properties", recording
            assert [e["kind"] for e in ica["excluded"]] == ["blink"] or "no-ocular-component" in codes, recording
            assert "no-eog" not in codes and qc["ocular"]["kept_blinks"] is None
        elif recording.datatype == "eeg":  # Cedar: ICA with its VEOG; blinks stay in kept trials, corrected
            assert qc["ocular"]["method"] == "ica" and qc["ocular"]["kept_blinks"] is None
            assert qc["ocular"]["corrected_residual"] < 0.2
        else:  # Dogwood (EOG061, MEG only: not corrected): blinks found on the vertical EOG
            blinks = qc["ocular"]["kept_blinks"]
            assert blinks["channel"] in ("VEOG", "EOG061") and blinks["blinks"] > 0
            t = next(t for t in truth["recordings"] if t["participant_id"] == recording.participant_id
                     and t["paradigm"] == recording.paradigm)
            if recording.paradigm == "oddball":
                # The injected blinks are found, each once (threshold 75 uV on the 1-10 Hz EOG).
                # Bounds are heschl's tolerances: a blink may be missed where another
                # artefact hides it, and a saturation's filter ringing adds a few.
                assert 0.9 * len(t["blinks_s"]) <= blinks["blinks"] <= 1.3 * len(t["blinks_s"])
                # Rejection leaves few blinks in oddball trials (at most 10 %: heschl's tolerance,
                # twice the max_blink_trials QC limit).
                assert blinks["fraction"] <= 0.1


def test_every_log_line_of_a_recording_names_it(processed_study):
    """Stage decisions are logged, counted, and each line says whose recording it is."""
    import logging

    from heschl.pipeline import process_recording
    from heschl.runlog import RecordingFilter

    study, _ = processed_study
    recording = next(r for r in discover(study) if r.site == "birch" and r.paradigm == "oddball")
    lines = []

    class Collect(logging.Handler):
        def emit(self, record):
            lines.append(self.format(record))

    handler = Collect()
    handler.addFilter(RecordingFilter())
    handler.setFormatter(logging.Formatter("%(recording)s%(message)s"))
    logger = logging.getLogger("heschl")
    old_level = logger.level
    logger.addHandler(handler)
    logger.setLevel(logging.INFO)
    try:
        process_recording(study, recording)
    finally:
        logger.removeHandler(handler)
        logger.setLevel(old_level)
    assert lines and all(line.startswith(f"{recording.participant_id} oddball: ") for line in lines)
    text = "\n".join(lines)
    for decision in ("Renamed", "Resampled from 512 Hz to 250 Hz", "interpolated", "Kept ", "Verdict"):
        assert decision in text, text
