"""Constants and reference computations shared by the numeric tests (tests/test_numeric_*.py).

Imported as ``from _helpers import ...``: pytest puts the tests folder on the import path
(it has no ``__init__.py``).
"""
import contextlib
import warnings

import numpy as np
import scipy.signal

#: Hz; no whole number of samples per second or per cycle, so no test passes by a lucky grid.
AWKWARD_SFREQ = 100 + np.pi


@contextlib.contextmanager
def mne_notices_ignored():
    """Ignore FutureWarning and DeprecationWarning inside the block.

    Deprecation notices of a newer mne concern mne, not a comparison with it; any other
    warning (e.g. about the data) still fails the test (warnings are errors in the suite).
    """
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        warnings.simplefilter("ignore", DeprecationWarning)
        yield


def scipy_welch(x, sfreq, segment, overlap=0.5):
    """scipy.signal.welch with the parameters heschl's ``welch_psd`` documents.

    docs/REFERENCES.md F9: scipy's Welch (Welch 1967) as the independent reference:
    periodic Hann window, ``round(segment * sfreq)`` samples per segment, the given
    overlap, each segment's mean removed, density scaling.

    Returns
    -------
    freqs : ndarray, Hz
    psd : ndarray, V**2/Hz, shape ``x.shape[:-1] + (n_freqs,)``
    nperseg : int
    """
    nperseg = round(segment * sfreq)
    freqs, psd = scipy.signal.welch(x, sfreq, window="hann", nperseg=nperseg,
                                    noverlap=int(nperseg * overlap), detrend="constant")
    return freqs, psd, nperseg
