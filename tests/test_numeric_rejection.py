"""Peak-to-peak rejection with a fixed limit.

External facts are named beside each assertion with their REFERENCES.md entry
(docs/REFERENCES.md, "F<n>").
"""
import logging

import mne
import numpy as np
import pytest
from _helpers import AWKWARD_SFREQ, mne_notices_ignored

from heschl.errors import DefinitionError, InputDataError
from heschl.numeric import fixed_threshold, peak_to_peak

CHANNELS = ["Fp1", "Fz", "Cz", "Pz"]
BLINK_EPOCHS = [7, 23, 48, 61, 90]
LIMIT = 100e-6  # V; a common fixed EEG limit (docs/REFERENCES.md F33, common practice)


@pytest.fixture
def epochs(rng):
    """100 epochs of 5 uV noise, 0.8 s at an awkward rate; 200 uV blinks at Fp1."""
    n_times = int(0.8 * AWKWARD_SFREQ)
    x = 5e-6 * rng.standard_normal((100, len(CHANNELS), n_times))
    t = np.arange(n_times) / AWKWARD_SFREQ
    blink = 200e-6 * np.exp(-0.5 * ((t - 0.4) / 0.05) ** 2)  # V
    x[BLINK_EPOCHS, 0] += blink
    return x


def test_peak_to_peak_is_max_minus_min(rng):
    x = rng.standard_normal((6, 3, 50))
    np.testing.assert_array_equal(peak_to_peak(x), np.ptp(x, axis=-1))


def test_blink_epochs_and_only_those_are_dropped(epochs):
    # docs/REFERENCES.md F33: 100 epochs, 5 with a 200 uV blink at Fp1 -> exactly those 5 at 100 uV.
    keep, reasons = fixed_threshold(peak_to_peak(epochs), LIMIT, CHANNELS)
    assert np.flatnonzero(~keep).tolist() == BLINK_EPOCHS
    assert all(reasons[i] == () for i in np.flatnonzero(keep))
    for i in BLINK_EPOCHS:
        (reason,) = reasons[i]
        assert reason.startswith("peak-to-peak 2") and reason.endswith(" uV > 100 uV at Fp1")


def test_baseline_correction_changes_nothing(epochs):
    # docs/REFERENCES.md F33: baseline correction cannot change peak-to-peak amplitude.
    baseline = epochs[..., :20].mean(axis=-1, keepdims=True)  # first ~0.19 s
    before = fixed_threshold(peak_to_peak(epochs), LIMIT, CHANNELS)
    after = fixed_threshold(peak_to_peak(epochs - baseline), LIMIT, CHANNELS)
    np.testing.assert_array_equal(before[0], after[0])
    # atol 1e-18 V: subtracting the offset rounds at 1e-21 V on uV-sized samples
    np.testing.assert_allclose(peak_to_peak(epochs), peak_to_peak(epochs - baseline),
                               rtol=0, atol=1e-18)


def test_same_epochs_as_mne_reject(epochs):
    # docs/REFERENCES.md F33: mne Epochs(reject=dict(eeg=100e-6)) documentation, same array.
    info = mne.create_info(CHANNELS, AWKWARD_SFREQ, ch_types="eeg")
    with mne_notices_ignored():
        # A copy: mne 1.13 keeps the given array and compacts it in place when it drops
        # epochs (seen here: the input lost its blink rows).
        reference = mne.EpochsArray(epochs.copy(), info, tmin=-0.2, reject=dict(eeg=LIMIT),
                                    baseline=None, verbose=False)
        reference.drop_bad(verbose=False)
    dropped_by_mne = [i for i, log in enumerate(reference.drop_log) if log]
    keep, _ = fixed_threshold(peak_to_peak(epochs), LIMIT, CHANNELS)
    assert np.flatnonzero(~keep).tolist() == dropped_by_mne == BLINK_EPOCHS


def test_reason_text_and_per_channel_limits():
    ptp = np.array([[212.3e-6, 40e-6, 100.04e-6, 20e-6],
                    [99e-6, 60e-6, 100e-6, np.nan]])
    keep, reasons = fixed_threshold(ptp, [150e-6, 50e-6, 100e-6, 100e-6], CHANNELS)
    assert keep.tolist() == [False, False]
    assert reasons[0] == ("peak-to-peak 212.3 uV > 150 uV at Fp1",
                          "peak-to-peak 100.04 uV > 100 uV at Cz")  # decimals to tell apart
    assert reasons[1] == ("peak-to-peak 60 uV > 50 uV at Fz",
                          "peak-to-peak not finite (nan) at Pz")  # 100 uV == limit is kept


def test_rejection_count_is_logged(epochs, caplog):
    with caplog.at_level(logging.INFO, logger="heschl.numeric.rejection"):
        fixed_threshold(peak_to_peak(epochs), LIMIT, CHANNELS)
    assert "Dropped 5 of 100 epochs (5 %)" in caplog.text


@pytest.mark.parametrize(("limit", "pattern"), [
    (0.0, r"limit = 0.0 V is not one positive value"),
    ([1e-4, 1e-4], r"or one per channel \(4\)"),
    (np.inf, r"limit = inf V"),
    (100.0, r"limit = 100 V is above 0.01 V and looks like a value in uV"),
])
def test_bad_limits_are_refused(limit, pattern):
    with pytest.raises(DefinitionError, match=pattern):
        fixed_threshold(np.zeros((3, 4)), limit, CHANNELS)


def test_bad_shapes_are_refused():
    with pytest.raises(InputDataError, match=r"x has shape \(4, 10\); pass epochs shaped"):
        peak_to_peak(np.zeros((4, 10)))
    with pytest.raises(InputDataError, match=r"ptp has shape \(3, 4\) but 3 channel names"):
        fixed_threshold(np.zeros((3, 4)), LIMIT, CHANNELS[:3])
