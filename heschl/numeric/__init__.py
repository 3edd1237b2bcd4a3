"""Plain numpy/scipy measures on arrays: phase coherence, spectra, ERP measures, rejection.

Nothing here knows about configuration, the CLI, reports or mne objects; every function
takes arrays in SI units (V, s, Hz) and documents shapes.
"""
from heschl.numeric.erp import POLARITIES, Peak, mean_amplitude, peak, plus_minus_snr, region_mean
from heschl.numeric.phase import (
    evoked_power,
    induced_power,
    itpc,
    itpc_critical,
    morlet_transform,
    morlet_wavelet,
    pairwise_phase_consistency,
    rayleigh,
    total_power,
)
from heschl.numeric.crossspectra import coherence, cross_spectra, imaginary_coherency, regularise
from heschl.numeric.rejection import fixed_threshold, peak_to_peak
from heschl.numeric.reliability import (
    bootstrap_interval,
    bootstrap_sme,
    lengthening_factor,
    sme_difference,
    sme_mean_amplitude,
    spearman_brown,
    split_half,
    split_half_cohort,
    split_half_recording,
)
from heschl.numeric.rhythms import aperiodic_fit, peak_frequency
from heschl.numeric.spectra import (
    CLOSURES,
    band_power,
    relative_band_power,
    snr_neighbours,
    welch_psd,
)

__all__ = [
    "morlet_wavelet",
    "morlet_transform",
    "itpc",
    "evoked_power",
    "total_power",
    "induced_power",
    "pairwise_phase_consistency",
    "rayleigh",
    "itpc_critical",
    "welch_psd",
    "band_power",
    "relative_band_power",
    "snr_neighbours",
    "CLOSURES",
    "mean_amplitude",
    "peak",
    "Peak",
    "region_mean",
    "plus_minus_snr",
    "POLARITIES",
    "peak_to_peak",
    "fixed_threshold",
    "cross_spectra",
    "coherence",
    "imaginary_coherency",
    "regularise",
    "spearman_brown",
    "lengthening_factor",
    "split_half",
    "split_half_cohort",
    "split_half_recording",
    "bootstrap_interval",
    "bootstrap_sme",
    "sme_mean_amplitude",
    "sme_difference",
    "aperiodic_fit",
    "peak_frequency",
]
