"""MEG: per-sensor-type processing, end to end on the synthetic Dogwood recording, and units."""
import json

import numpy as np
import pytest

from heschl.adaptive import _distance_adjacency
from heschl.config import builtin_dir, load_feature_set, load_paradigm
from heschl.errors import DefinitionError, InputDataError
from heschl.features import Source, check_units
from heschl.outputs import recording_paths
from heschl.inputs import discover
from heschl.segment import reject


@pytest.fixture(scope="module")
def dogwood(processed_study):
    study, _ = processed_study
    recording = next(r for r in discover(study) if r.site == "dogwood")
    paths = recording_paths(study.output, recording)
    truth = json.loads((study.root / "truth.json").read_text())
    return {"study": study, "recording": recording, "paths": paths,
            "qc": json.loads(paths["qc"].read_text()),
            "provenance": json.loads(paths["provenance"].read_text()),
            "truth": next(t for t in truth["recordings"] if t["site"] == "dogwood")}


def test_meg_recording_runs_end_to_end_into_the_meg_folder(dogwood):
    # BIDS: MEG recordings live in the meg/ datatype folder of the subject.
    assert dogwood["paths"]["qc"].parent.name == "meg"
    assert all(p.exists() for p in dogwood["paths"].values())
    qc = dogwood["qc"]
    assert qc["datatype"] == "meg" and qc["verdict"] != "unusable"
    assert set(qc["channels"]["by_type"]) == {"mag", "grad"}
    assert qc["feature_sets"]["used"] == ["oddball-meg"]
    assert qc["feature_sets"]["not_applicable"]["oddball-core"].endswith("this recording has no EEG channel")
    assert qc["reference"]["reference"].startswith("none: no EEG channels")
    # Plus-minus SNR pooled within each sensor type, never across V and T.
    assert {"standard (MAG)", "standard (GRAD)", "deviant (MAG)", "deviant (GRAD)"} == set(qc["snr"])


def test_meg_rejection_learns_thresholds_per_sensor_type(dogwood):
    rejection = dogwood["provenance"]["steps"]["rejection"]
    assert rejection["method"] == "adaptive"
    assert set(rejection["n_interpolate"]) == set(rejection["consensus"]) == {"mag", "grad"}
    mags, grads = rejection["thresholds_ft"], rejection["thresholds_ft_per_cm"]
    assert all(name.endswith("1") for name in mags) and not any(name.endswith("1") for name in grads)
    # Magnetometer thresholds are hundreds to thousands of fT (mne's tutorials use 4000 fT
    # as a fixed limit; common practice); gradiometers tens to thousands of fT/cm.
    assert 100 < np.median(list(mags.values())) < 10000
    assert 10 < np.median(list(grads.values())) < 10000


def test_meg_bad_channels_are_found_per_type(dogwood):
    flagged = set(dogwood["qc"]["channels"]["bad"])
    injected = {b["channel"] for b in dogwood["truth"]["bad_channels"]}
    assert injected <= flagged and len(flagged - injected) <= 1
    reasons = dogwood["qc"]["channels"]["bad"]
    for name in injected:
        unit = "fT/cm" if not name.endswith("1") else "fT"
        assert f" {unit}" in reasons[name] or "unpredictable" in reasons[name]


def test_mismatch_field_is_recovered_within_its_interval(dogwood):
    """Recovery test of the synthetic scenario: the noise-free region mean of the generator
    lies inside the feature's 95 % bootstrap interval, and the sign is right."""
    import pandas as pd

    study = dogwood["study"]
    fs = next(f for a in study.analyses for f in a.feature_sets if f.name == "oddball-meg")
    table = pd.read_csv(dogwood["paths"]["features"], sep="\t").set_index("feature")
    expected = dogwood["truth"]["expected"]["mismatch_mean_field"]
    for feature, region, unit in (("mismatch_field_left_mag", "left_anterior_mag", "fT"),
                                  ("mismatch_field_right_mag", "right_anterior_mag", "fT"),
                                  ("mismatch_gradient_left", "left_temporal_grad", "fT/cm"),
                                  ("mismatch_gradient_right", "right_temporal_grad", "fT/cm")):
        truth = float(np.mean([expected[c] for c in fs.regions[region]]))
        row = table.loc[feature]
        assert row["unit"] == unit
        assert np.sign(row["value"]) == np.sign(truth), feature
        assert row["ci_low"] <= truth <= row["ci_high"], (feature, truth, row["ci_low"], row["ci_high"])


def test_meg_waveforms_carry_si_units_per_channel_type(dogwood):
    import xarray as xr

    name = next(n for n in dogwood["provenance"]["arrays"] if "waveforms" in n)
    with xr.open_dataset(dogwood["paths"]["qc"].parent / name) as ds:
        assert ds["average"].attrs["units"] == "V, T or T/m by channel_type"
        assert set(ds["channel_type"].values) == {"mag", "grad"}


# --- units, thresholds and definitions per sensor type ------------------------------------

PARADIGM = load_paradigm(builtin_dir("paradigms") / "oddball.toml")


def _source(types):
    names = [f"S{i}" for i in range(len(types))]
    data = {"standard": np.zeros((3, len(types), 10)), "deviant": np.zeros((3, len(types), 10))}
    return Source(data, np.arange(10) / 250.0, names, 250.0, PARADIGM, ch_types=types)


def _one_measure_file(path, region, **measure):
    """Write a feature set for the oddball paradigm: one region of channels S0, S1 and one
    measure on it (values written as JSON, which is valid TOML for texts, numbers and lists)."""
    lines = [f'name = "{path.stem}"', 'paradigm = "oddball"', "[regions]", f'{region} = ["S0", "S1"]',
             "[[measures]]"] + [f"{key} = {json.dumps(value)}" for key, value in dict(measure, region=region).items()]
    path.write_text("\n".join(lines) + "\n")
    return path


def test_a_unit_of_the_wrong_sensor_type_is_a_one_line_error(tmp_path):
    path = _one_measure_file(tmp_path / "meg-check.toml", "front", name="field", kind="mean-amplitude",
                             signal="mismatch", window=[0.0, 0.02])
    fs = load_feature_set(path, PARADIGM)
    with pytest.raises(DefinitionError, match=r'measure field reads region front, whose channels are MAG, but its '
                                              r'unit "uV" is for EEG; set unit = "fT"'):
        check_units(fs, _source(["mag", "mag"]))
    with pytest.raises(DefinitionError, match=r"region front mixes sensor types \(eeg, mag\).*split it"):
        check_units(fs, _source(["eeg", "mag"]))
    check_units(fs, _source(["eeg", "eeg"]))  # uV on EEG is right


def test_fixed_limits_are_per_sensor_type():
    # mne's tutorials reject at 4000 fT (magnetometers) and 4000 fT/cm (gradiometers); the
    # paradigm's defaults follow them (common practice).
    import dataclasses

    rejection = dataclasses.replace(PARADIGM.rejection, method="fixed", peak_to_peak=100e-6,
                                    peak_to_peak_meg={"mag": 4000e-15, "grad": 4000e-13})
    paradigm = dataclasses.replace(PARADIGM, rejection=rejection)
    x = np.zeros((3, 3, 10))
    x[0, 0, 5] = 150e-6        # EEG: 150 uV > 100 uV
    x[1, 1, 5] = 5000e-15      # magnetometer: 5000 fT > 4000 fT
    x[2, 2, 5] = 3000e-13      # gradiometer: 3000 fT/cm < 4000 fT/cm, kept
    entries = [{"condition": "standard", "onset_s": float(i), "kept": False, "reason": None, "index": i}
               for i in range(3)]
    arrays, entries, record = reject(x, np.arange(10) / 250.0, entries, ["E", "M", "G"], paradigm,
                                     types=["eeg", "mag", "grad"])
    assert [e["kept"] for e in entries] == [False, False, True]
    assert entries[0]["reason"] == "peak-to-peak: 150 uV > 100 uV at E"
    assert entries[1]["reason"] == "peak-to-peak: 5000 fT > 4000 fT at M"
    assert record["limits"] == {"eeg": "100 uV", "mag": "4000 fT", "grad": "4000 fT/cm"}


def test_meg_limits_are_read_from_the_paradigm(tmp_path):
    text = (builtin_dir("paradigms") / "clicktrain.toml").read_text()
    path = tmp_path / "p.toml"
    path.write_text(text.replace("[rejection]", "[rejection]\npeak_to_peak_ft = 3000.0", 1))
    paradigm = load_paradigm(path)
    assert paradigm.rejection.peak_to_peak_meg == {"mag": pytest.approx(3000e-15), "grad": pytest.approx(4000e-13)}
    import re

    text = re.sub(r"(?m)^peak_to_peak_uv.*$", "", text.replace('method = "fixed"', 'method = "none"'))
    path.write_text(text.replace("[rejection]", "[rejection]\npeak_to_peak_ft_per_cm = 3000.0", 1))
    with pytest.raises(DefinitionError, match=r'rejection.peak_to_peak_ft_per_cm: is only used with method = "fixed"'):
        load_paradigm(path)


def test_co_located_gradiometers_are_neighbours_and_do_not_set_the_scale():
    # Two planar gradiometers share each location; the distance rule must still link
    # neighbouring locations (1.5 x the median distance between locations).
    locations = np.array([[0.0, 0.0, 0.1], [0.03, 0.0, 0.1], [0.06, 0.0, 0.1], [0.2, 0.0, 0.1]])
    pos = np.repeat(locations, 2, axis=0)
    adj = _distance_adjacency(pos)
    assert adj[0, 1] and adj[0, 2] and adj[2, 4] and not adj[0, 4] and not adj[0, 6]


def test_an_meg_file_at_an_eeg_site_is_a_one_line_error(processed_study, tmp_path):
    import dataclasses

    from heschl.harmonise import harmonise, read_raw

    study, _ = processed_study
    recording = next(r for r in discover(study) if r.site == "dogwood")
    site = dataclasses.replace(study.sites["dogwood"], datatype="eeg")
    with pytest.raises(InputDataError, match=r'holds 138 MEG channels but site "dogwood" has datatype = "eeg"; '
                                             r'set sites.dogwood.datatype = "meg"'):
        harmonise(read_raw(recording.path), site, PARADIGM, study.common_channels, "x.fif")


def test_feature_sets_apply_by_sensor_modality_and_missing_channels_are_errors():
    import dataclasses

    from heschl.config import Analysis, FeatureSet
    from heschl.features import applicable

    fs = FeatureSet("mixed", "oddball", "", "mixed.toml", {"r": ("Fz", "MEG0111")}, {}, {}, ())
    with pytest.raises(InputDataError, match=r'x.fif: lacks channels MEG0111 of the regions of feature set "mixed"'):
        applicable(Analysis(PARADIGM, (fs,)), ["Fz", "Cz", "MEG0112"], "x.fif", {"eeg", "grad"})
    eeg = dataclasses.replace(fs, name="eeg", regions={"r": ("Fz", "Cz")})
    meg = dataclasses.replace(fs, name="meg", regions={"r": ("MEG0111",)})
    used, skipped = applicable(Analysis(PARADIGM, (eeg, meg)), ["Fz", "Cz"], "x.fif", {"eeg"})
    assert [f.name for f in used.feature_sets] == ["eeg"] and list(skipped) == ["meg"]
    assert skipped["meg"] == "its regions name MEG channels (MEG0111) and this recording has no MEG channel"
    # An EEG set on an EEG recording that lacks all its channels is an error, not a skip.
    with pytest.raises(InputDataError, match=r'lacks channels Cz, Fz of the regions of feature set "eeg"'):
        applicable(Analysis(PARADIGM, (eeg, meg)), ["Pz"], "x.fif", {"eeg"})
    with pytest.raises(InputDataError, match=r'no feature set of paradigm "oddball" reads its channels'):
        applicable(Analysis(PARADIGM, (meg,)), ["Fz"], "x.fif", {"eeg"})


def test_rms_combine_is_polarity_free_and_the_mean_cancels():
    # Definition (root mean square): two channels at +a and -a give a mean of 0 and an RMS of a.
    import dataclasses

    from heschl.features import MEASURES

    source = _source(["grad", "grad"])
    wave = np.zeros((2, 10))
    wave[0, 3:6], wave[1, 3:6] = 20e-13, -20e-13
    source.data["deviant"][:] = wave
    measure = next(m for m in load_feature_set(builtin_dir("features") / "oddball-meg.toml", PARADIGM).measures
                   if m.name == "mismatch_gradient_rms_left")
    regions = {"pair": ("S0", "S1")}
    window = (0.0, 0.036)
    rms = dataclasses.replace(measure, params=dict(measure.params, region="pair", window=window))
    mean = dataclasses.replace(rms, params=dict(rms.params, combine="mean"))
    assert MEASURES["mean-amplitude"](mean, source, regions, {}) == pytest.approx(0.0)
    expected = 20e-13 * 3 / 10  # RMS is 20e-13 on 3 of the 10 samples in the window
    assert MEASURES["mean-amplitude"](rms, source, regions, {}) == pytest.approx(expected)


def test_rms_with_negative_polarity_is_refused(tmp_path):
    path = _one_measure_file(tmp_path / "rms.toml", "pair", name="p", kind="peak-amplitude", signal="mismatch",
                             window=[0.1, 0.2], polarity="negative", combine="rms")
    with pytest.raises(DefinitionError, match=r'measures\[0\].polarity: a root mean square over channels is never '
                                              r'negative; use polarity = "positive" with combine = "rms"'):
        load_feature_set(path, PARADIGM)
