"""Re-reference policies: linear, reference-invariant differences, mastoid pairs."""
import numpy as np
import pytest

import mne

from heschl.clean import rereference
from heschl.errors import InputDataError

NAMES = ["Fz", "FCz", "Cz", "Pz", "TP9", "TP10"]


def _raw(data):
    info = mne.create_info(NAMES, 250.0, "eeg")
    return mne.io.RawArray(data.copy(), info, verbose="error")


@pytest.fixture
def data():
    return np.random.default_rng(0).normal(0, 10e-6, (len(NAMES), 500))


@pytest.mark.parametrize("reference", ["average", "linked-mastoids", ("Cz",), ("TP9", "TP10")])
def test_rereferencing_is_linear(data, reference):
    # docs/REFERENCES.md F19: reref(dev) - reref(std) == reref(dev - std) to 1e-12 (linearity).
    rng = np.random.default_rng(1)
    dev, std = data, rng.normal(0, 10e-6, data.shape)
    a, b, d = _raw(dev), _raw(std), _raw(dev - std)
    for raw in (a, b, d):
        rereference(raw, reference)
    np.testing.assert_allclose(a.get_data() - b.get_data(), d.get_data(), atol=1e-18)


def test_linked_mastoids_use_the_mastoid_pair(data):
    raw = _raw(data)
    record = rereference(raw, "linked-mastoids")
    assert record == {"reference": "linked-mastoids", "channels": ["TP9", "TP10"]}
    expected = data - data[[4, 5]].mean(axis=0)
    np.testing.assert_allclose(raw.get_data(), expected, atol=1e-18)


def test_average_reference_sums_to_zero(data):
    raw = _raw(data)
    rereference(raw, "average")
    np.testing.assert_allclose(raw.get_data().sum(axis=0), 0.0, atol=1e-18)


def test_as_recorded_leaves_data_alone(data):
    raw = _raw(data)
    assert rereference(raw, "as-recorded") == {"reference": "as-recorded"}
    np.testing.assert_array_equal(raw.get_data(), data)


def test_missing_reference_channel_is_a_one_line_error(data):
    with pytest.raises(InputDataError, match=r"^x\.vhdr: reference channels M1 are not in the recording; choose"):
        rereference(_raw(data), ("M1",), where="x.vhdr")
    raw = mne.io.RawArray(data[:4].copy(), mne.create_info(NAMES[:4], 250.0, "eeg"), verbose="error")
    with pytest.raises(InputDataError, match=r"no mastoid pair"):
        rereference(raw, "linked-mastoids", where="x.vhdr")


def test_mastoid_polarity_inverts_under_average_reference():
    # docs/REFERENCES.md F19 (Naatanen et al. 2007): with a generator in auditory cortex the
    # mismatch response is negative fronto-centrally and positive at the mastoids under an
    # average (or nose) reference; a linked-mastoid reference absorbs it (mastoids read 0).
    # The potentials against an inactive (nose-like) point, V; the same scalp field read
    # against the linked mastoids, as many labs record it, shows no mastoid inversion at all.
    scalp = np.array([-1.0, -1.0, -0.8, -0.2, 0.6, 0.6])[:, None] * np.ones((1, 10)) * 1e-6
    as_recorded = scalp - scalp[[4, 5]].mean(axis=0)
    assert (as_recorded[[4, 5]] == 0).all()

    avg = _raw(as_recorded)
    rereference(avg, "average")
    # Independent computation (common practice, the definition of the average reference):
    # subtract the mean over the EEG channels at every sample, by hand with numpy. It
    # equals the scalp field minus its mean whatever the recording reference was.
    by_hand = as_recorded - as_recorded.mean(axis=0)
    np.testing.assert_allclose(by_hand, scalp - scalp.mean(axis=0), atol=1e-18)
    np.testing.assert_allclose(avg.get_data(), by_hand, atol=1e-18)
    # The inversion appears only through re-referencing: mastoids were 0, now positive.
    assert (avg.get_data()[[4, 5]] > 0.5e-6).all() and (avg.get_data()[[0, 1]] < 0).all()

    linked = _raw(scalp)
    rereference(linked, "linked-mastoids")
    assert (scalp[[4, 5]] > 0).all()  # before: the mastoids carry the response
    np.testing.assert_allclose(linked.get_data(), as_recorded, atol=1e-18)
    np.testing.assert_allclose(linked.get_data()[[4, 5]], 0.0, atol=1e-18)
