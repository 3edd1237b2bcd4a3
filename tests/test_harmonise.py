"""Channel names, markers and reference restoration, checked against mne's montages."""
import numpy as np
import pytest

import mne

from heschl.config import Site
from heschl.errors import InputDataError
from heschl.harmonise import (OLD_NAMES, canonical_channel_names, extract_markers,
                              standard_montage)


def _template(kind):
    """mne's shipped 10-20/10-05 template; colin27_* replaces standard_* in mne 1.13."""
    for name in (f"colin27_{kind}", f"standard_{kind}"):
        try:
            return mne.channels.make_standard_montage(name)
        except ValueError:
            continue
    raise RuntimeError("no template montage")


def _positions(montage):
    return montage.get_positions()["ch_pos"]


def test_old_names_map_to_new_names():
    # docs/REFERENCES.md F16: ACNS Guideline 2 (2016) renames T3->T7, T4->T8, T5->P7, T6->P8.
    assert OLD_NAMES == {"T3": "T7", "T4": "T8", "T5": "P7", "T6": "P8"}
    mapping = canonical_channel_names(["T3", "T4", "T5", "T6"])
    assert mapping == {"T3": "T7", "T4": "T8", "T5": "P7", "T6": "P8"}


def test_old_and_new_names_share_positions_in_mne_1020_montage():
    # docs/REFERENCES.md F16: mne's shipped 10-20 montage holds both spellings at identical
    # coordinates (distance 0.0 m); 1e-9 m tolerance is float noise only.
    pos = _positions(_template("1020"))
    for old, new in OLD_NAMES.items():
        np.testing.assert_allclose(pos[old], pos[new], atol=1e-9)


def test_renamed_channels_get_the_positions_of_their_new_names():
    # docs/REFERENCES.md F16: positions of the renamed labels equal mne's positions of the new labels.
    ours = _positions(standard_montage())
    ref = _positions(_template("1020"))
    for old in OLD_NAMES:
        new = canonical_channel_names([old])[old]
        np.testing.assert_allclose(ours[new], ref[new], atol=1e-9)


def test_names_are_case_robust_and_keep_unknown_names():
    # docs/REFERENCES.md F16: 'FCZ' -> 'FCz' (case-robust mapping).
    mapping = canonical_channel_names(["FCZ", "FP1", "EEG Cz", "Fz", "VEOG", "STI 014"])
    assert mapping == {"FCZ": "FCz", "FP1": "Fp1", "EEG Cz": "Cz"}


def test_site_aliases_take_precedence():
    mapping = canonical_channel_names(["E1", "T3"], aliases={"E1": "Fp1", "T3": "T7"})
    assert mapping == {"E1": "Fp1", "T3": "T7"}


def test_hemisphere_convention_holds_in_the_montage():
    # docs/REFERENCES.md F17: odd numbers left (x < 0), even right (x > 0), z midline (|x| < 5 mm).
    for name, xyz in _positions(standard_montage()).items():
        digits = "".join(ch for ch in name if ch.isdigit())
        if name.lower().endswith("z"):
            assert abs(xyz[0]) < 0.005, name
        elif digits:
            assert (xyz[0] < 0) == (int(digits) % 2 == 1), name


def _raw_with_annotations(sfreq=512.0):
    info = mne.create_info(["Fz", "Cz"], sfreq, "eeg")
    raw = mne.io.RawArray(np.zeros((2, int(sfreq * 10))), info, verbose="error")
    raw.set_annotations(mne.Annotations([1.0, 2.0, 3.5], [0, 0, 0], ["11", "12", "99"]))
    return raw


def test_markers_are_mapped_and_delay_corrected():
    raw = _raw_with_annotations()
    markers = extract_markers(raw, {"11": "standard", "12": "deviant"}, 0.018, "x.edf")
    assert markers.labels == ["standard", "deviant"]
    # Onsets are sample-rounded at 512 Hz: tolerance half a sample.
    np.testing.assert_allclose(markers.onsets, [1.0 - 0.018, 2.0 - 0.018], atol=0.5 / 512)
    assert markers.unknown == {"99": 1}


def test_no_known_marker_is_a_one_line_error():
    raw = _raw_with_annotations()
    with pytest.raises(InputDataError, match=r"^x\.edf: no marker of the paradigm found .*99.*markers\.<paradigm>"):
        extract_markers(raw, {"1": "standard"}, 0.0, "x.edf")


def test_stimulus_channel_codes_become_text_codes():
    sfreq = 1000.0
    stim = np.zeros(5000)
    stim[1000:1005] = 1
    stim[2000:2005] = 2
    info = mne.create_info(["Fz", "STI 014"], sfreq, ["eeg", "stim"])
    raw = mne.io.RawArray(np.vstack([np.zeros(5000), stim]), info, verbose="error")
    markers = extract_markers(raw, {"1": "standard", "2": "deviant"}, 0.0, "x.fif")
    assert markers.labels == ["standard", "deviant"]
    np.testing.assert_allclose(markers.onsets, [1.0, 2.0])


def test_recording_reference_channel_is_restored():
    from heschl.harmonise import _restore_reference, reference_channel

    info = mne.create_info(["Fz", "Cz"], 250.0, "eeg")
    raw = mne.io.RawArray(np.ones((2, 100)) * 1e-6, info, verbose="error")
    site = Site(name="alder", recording_reference="FCZ", line_frequency=50.0, trigger_delay=0.0,
                files={}, markers={}, channel_aliases={}, eog_channels=(), subject_pattern="sub-(x)",
                bad_channels={})
    assert reference_channel(site) == "FCz"
    assert _restore_reference(raw, reference_channel(site)) == "FCz"
    assert raw.ch_names == ["Fz", "Cz", "FCz"]
    np.testing.assert_array_equal(raw.get_data(picks=["FCz"]), 0.0)


def test_what_check_plans_is_what_harmonising_keeps(processed_study):
    # heschl check (inspect on the header and cheap reads) and heschl run (harmonise on the
    # loaded data) share one code path: the channels and types inspect plans are the ones
    # harmonising keeps, and the markers are the same, at every site of the synthetic study
    # (BrainVision, EDF, FIF with EOG, MEG).
    from heschl.harmonise import harmonise, inspect, read_raw
    from heschl.inputs import analysis_of, discover

    study, _ = processed_study
    seen = set()
    for rec in discover(study):
        if rec.site in seen:
            continue
        seen.add(rec.site)
        site, paradigm = study.sites[rec.site], analysis_of(study, rec).paradigm
        planned_markers, planned = inspect(read_raw(rec.path, preload=False), site, paradigm,
                                           study.common_channels, rec.path.name)
        _, markers, done = harmonise(read_raw(rec.path), site, paradigm, study.common_channels, rec.path.name)
        assert planned["channels"] == done["channels"], rec.site
        assert planned["channel_types"] == done["channel_types"], rec.site
        assert planned_markers.labels == markers.labels and np.array_equal(planned_markers.onsets, markers.onsets)
    assert len(seen) == 4
