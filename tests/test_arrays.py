"""Model-ready labelled arrays and their NetCDF files.

External facts are named beside each assertion with their REFERENCES.md entry
(docs/REFERENCES.md, "F<n>").
"""
import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from heschl import config
from heschl.arrays import ARRAY_SUFFIXES, flat_attributes, model_arrays, write_netcdf
from heschl.errors import DefinitionError, InputDataError
from heschl.features import Source

AWKWARD_SFREQ = 250 + np.pi  # Hz; no whole number of samples per second or per cycle
CHANNELS = ["Fz", "Cz", "Pz", "C3", "C4"]
PROVENANCE = {"heschl_version": "0.1.0", "participant_id": "sub-07", "site": "Birch",
              "paradigm": "oddball", "input_key": "ab" * 32, "definitions_sha256": "cd" * 32,
              "versions": {"numpy": np.__version__, "xarray": xr.__version__}}
UNITS = {"V", "V^2", "s", "Hz", "V^2/Hz", "1"}


@pytest.fixture
def rng():
    return np.random.default_rng(20240611)


def _paradigm(name):
    return config.load_paradigm(config.builtin_dir("paradigms") / f"{name}.toml")


def _source(rng, name, counts, window, signal=None):
    """Noise trials (10 uV sd) per condition, plus ``signal(t)`` in every trial if given."""
    paradigm = _paradigm(name)
    times = np.arange(window[0], window[1], 1.0 / AWKWARD_SFREQ)
    data = {}
    for condition, n in counts.items():
        x = 10e-6 * rng.standard_normal((n, len(CHANNELS), times.size))
        data[condition] = x + (signal(times) if signal is not None else 0.0)
    return Source(data, times, CHANNELS, AWKWARD_SFREQ, paradigm)


@pytest.fixture
def oddball(rng):
    return _source(rng, "oddball", {"standard": 40, "deviant": 12}, (-0.1, 0.5))


@pytest.fixture
def rest(rng):
    # Coupled channels: C4 is Cz delayed by 3 samples, so cross-spectra have imaginary parts.
    source = _source(rng, "rest", {"eyes-open": 8, "eyes-closed": 6}, (0.0, 2.0))
    for x in source.data.values():
        x[:, 4, 3:] += x[:, 1, :-3]
    return source


def _units_everywhere(ds):
    """Every numeric variable and coordinate has a known unit; text labels a long_name."""
    for name, var in ds.variables.items():
        if var.dtype.kind in "OUS":
            assert "long_name" in var.attrs, name
        else:
            assert var.attrs.get("units") in UNITS, name


# -- datasets: dims, coordinates, units ----------------------------------------------------


def test_waveforms_hold_every_condition_and_contrast_with_labelled_axes_and_units(oddball):
    arrays = model_arrays(oddball, design="event-related", provenance=PROVENANCE)
    assert list(arrays) == ["waveforms"]
    ds = arrays["waveforms"]
    assert ds["average"].dims == ("signal", "channel", "time")
    assert list(ds["signal"].values) == ["standard", "deviant", "mismatch"]
    assert list(ds["signal_kind"].values) == ["condition", "condition", "contrast"]
    assert list(ds["channel"].values) == CHANNELS
    np.testing.assert_array_equal(ds["time"].values, oddball.times)
    assert ds["average"].attrs["units"] == "V" and ds["time"].attrs["units"] == "s"
    assert list(ds["n_trials"].values) == [40, 12, 12]  # a contrast counts its smaller side
    assert json.loads(ds.attrs["contrasts"]) == {"mismatch": "deviant - standard"}
    _units_everywhere(ds)


def test_channels_choose_a_subset_in_the_given_order(oddball):
    ds = model_arrays(oddball, design="event-related", provenance={}, channels=["Pz", "Fz"])["waveforms"]
    assert list(ds["channel"].values) == ["Pz", "Fz"]
    np.testing.assert_array_equal(ds["average"].sel(signal="deviant").values,
                                  oddball.average("deviant")[[2, 0]])


def test_difference_wave_in_the_file_is_deviant_minus_standard_exactly(oddball, tmp_path):
    ds = model_arrays(oddball, design="event-related", provenance=PROVENANCE)["waveforms"]
    back = xr.load_dataset(write_netcdf(tmp_path / "w.nc", ds), engine="h5netcdf")
    average = back["average"]
    expected = oddball.data["deviant"].mean(axis=0) - oddball.data["standard"].mean(axis=0)
    # exact: float64 survives NetCDF unchanged and the same operations give the same bits
    np.testing.assert_array_equal(average.sel(signal="mismatch").values, expected)
    np.testing.assert_array_equal(average.sel(signal="mismatch").values,
                                  (average.sel(signal="deviant") - average.sel(signal="standard")).values)


def test_itpc_of_phase_locked_trials_is_one_and_evoked_power_is_the_sinusoid_power(rng):
    amplitude, freq = 2e-6, 40.0  # V, Hz
    source = _source(rng, "clicktrain", {"train": 0}, (-0.4, 0.9))
    times = source.times
    source.data["train"] = np.broadcast_to(amplitude * np.cos(2 * np.pi * freq * times),
                                           (10, len(CHANNELS), times.size)).copy()
    arrays = model_arrays(source, design="steady-state", provenance={}, stimulation_frequency=freq)
    assert list(arrays) == ["waveforms", "itpc"]
    ds = arrays["itpc"]
    assert ds["itpc"].dims == ds["evoked_power"].dims == ("signal", "channel", "time")
    assert float(ds["frequency"]) == freq and ds["frequency"].attrs["units"] == "Hz"
    assert ds["itpc"].attrs["units"] == "1" and ds["evoked_power"].attrs["units"] == "V^2"
    _units_everywhere(ds)
    # away from the edges (the wavelet spans +/- 5 sd = +/- 139 ms at 40 Hz, 7 cycles)
    inner = ds.sel(time=slice(0.0, 0.5))
    # identical trials: ITPC = 1 analytically; rounding of unit phasors only (1e-12)
    np.testing.assert_allclose(inner["itpc"].values, 1.0, atol=1e-12)
    # |coef| of a sinusoid is its RMS, so evoked power = A^2 / 2 (morlet_transform notes);
    # 1e-6 relative covers the sampled envelope's finite support
    np.testing.assert_allclose(inner["evoked_power"].values, amplitude**2 / 2, rtol=1e-6)


def test_spectra_hold_the_mean_welch_density_per_condition(rest):
    spec = {"segment": 1.0, "overlap": 0.5}
    arrays = model_arrays(rest, design="resting", provenance={}, spectrum=spec)
    assert list(arrays) == ["spectra"]
    ds = arrays["spectra"]
    assert ds["psd"].dims == ("signal", "channel", "frequency")
    assert list(ds["signal"].values) == ["eyes-open", "eyes-closed"]
    assert ds["psd"].attrs["units"] == "V^2/Hz" and ds["frequency"].attrs["units"] == "Hz"
    freqs, psd = rest.spectrum("eyes-closed", spec)
    np.testing.assert_array_equal(ds["frequency"].values, freqs)
    np.testing.assert_array_equal(ds["psd"].sel(signal="eyes-closed").values, psd)
    assert ds.attrs["welch_segment_s"] == 1.0 and ds.attrs["welch_window"] == "hann"
    _units_everywhere(ds)


def test_csd_parts_rebuild_a_hermitian_matrix_whose_diagonal_is_the_psd(rest, tmp_path):
    # docs/REFERENCES.md F37: S is Hermitian and its diagonal is the Welch auto-spectrum of the
    # same segments (Bendat & Piersol 2010; scipy.signal.csd / welch).
    spec = {"segment": 1.0, "overlap": 0.5}
    arrays = model_arrays(rest, design="resting", provenance={}, spectrum=spec,
                          csd=dict(spec, fmin=2.0, fmax=30.0))
    csd = xr.load_dataset(write_netcdf(tmp_path / "c.nc", arrays["csd"]), engine="h5netcdf")
    for part in ("real", "imag"):
        assert csd[part].dims == ("signal", "frequency", "channel", "channel_to")
        assert csd[part].attrs["units"] == "V^2/Hz"
    assert list(csd["channel"].values) == list(csd["channel_to"].values) == CHANNELS
    assert 2.0 - 1.1 <= csd["frequency"].values.min() and csd["frequency"].values.max() <= 30.0 + 1.1
    _units_everywhere(csd)
    s = (csd["real"] + 1j * csd["imag"]).values
    # Hermitian by construction: exactly, not to a tolerance
    np.testing.assert_array_equal(s, np.conj(np.swapaxes(s, -1, -2)))
    diagonal = np.diagonal(s, axis1=-2, axis2=-1)  # (signal, frequency, channel)
    assert np.all(diagonal.imag == 0)  # auto-spectra are real, F37
    assert np.abs(s.imag).max() > 0.01 * np.abs(s.real).max()  # the lagged pair shows up
    psd = arrays["spectra"]["psd"].sel(frequency=csd["frequency"]).transpose("signal", "frequency", "channel")
    np.testing.assert_allclose(diagonal.real, psd.values, rtol=1e-10)  # F37, same periodograms


def test_a_condition_without_trials_gives_nan_and_zero_trials(rng):
    source = _source(rng, "rest", {"eyes-open": 3, "eyes-closed": 0}, (0.0, 2.0))
    spec = {"segment": 1.0, "overlap": 0.0}
    arrays = model_arrays(source, design="resting", provenance={}, spectrum=spec, csd=spec)
    for ds, var in ((arrays["spectra"], "psd"), (arrays["csd"], "real")):
        assert list(ds["n_trials"].values) == [3, 0]
        assert np.isnan(ds[var].sel(signal="eyes-closed")).all()
        assert np.isfinite(ds[var].sel(signal="eyes-open")).all()


# -- provenance attributes ------------------------------------------------------------------


def test_provenance_becomes_text_and_number_attributes():
    attrs = flat_attributes({"a": "x", "n": np.int64(3), "f": 0.5, "path": Path("sub-01") / "eeg",
                             "nested": {"b": [1, 2]}, "flag": True, "missing": None})
    assert attrs["a"] == "x" and attrs["n"] == 3 and type(attrs["n"]) is int and attrs["f"] == 0.5
    assert attrs["path"] == os.path.join("sub-01", "eeg")
    assert json.loads(attrs["nested"]) == {"b": [1, 2]}
    assert attrs["flag"] == "true" and attrs["missing"] == "null"


def test_provenance_may_not_overwrite_heschl_attributes(oddball):
    with pytest.raises(DefinitionError, match=r"provenance key 'design' .* reserved: heschl_array"):
        model_arrays(oddball, design="event-related", provenance={"design": "x"})


# -- files ---------------------------------------------------------------------------------


@pytest.mark.parametrize("engine", ["", ', engine="h5netcdf"'])
def test_a_written_file_opens_in_a_fresh_interpreter_with_two_lines(oddball, tmp_path, engine):
    ds = model_arrays(oddball, design="event-related", provenance=PROVENANCE)["waveforms"]
    path = write_netcdf(tmp_path / f"sub-07_task-oddball_desc-waveforms_{ARRAY_SUFFIXES['waveforms']}.nc", ds)
    snippet = f"import xarray as xr\nds = xr.open_dataset({str(path)!r}{engine})\n"
    report = textwrap.dedent("""
        import json
        print(json.dumps({"dims": dict(ds.sizes), "average": list(ds["average"].dims),
                          "units": {k: v.attrs.get("units") for k, v in ds.variables.items()},
                          "attrs": {k: str(v) for k, v in ds.attrs.items()}}))
        ds.close()
    """)
    done = subprocess.run([sys.executable, "-W", "error", "-c", snippet + report],
                          capture_output=True, text=True, timeout=60, check=False)
    assert done.returncode == 0, done.stderr
    seen = json.loads(done.stdout)
    assert seen["dims"] == {"signal": 3, "channel": len(CHANNELS), "time": oddball.times.size}
    assert seen["average"] == ["signal", "channel", "time"]
    assert seen["units"]["average"] == "V" and seen["units"]["time"] == "s"
    assert seen["units"]["n_trials"] == "1"
    assert seen["attrs"]["participant_id"] == "sub-07" and seen["attrs"]["site"] == "Birch"
    assert seen["attrs"]["input_key"] == "ab" * 32 and seen["attrs"]["heschl_array"] == "waveforms"
    assert json.loads(seen["attrs"]["versions"])["xarray"] == xr.__version__


def test_writing_leaves_only_the_target_and_a_failed_write_leaves_the_old_file(oddball, tmp_path,
                                                                               monkeypatch):
    ds = model_arrays(oddball, design="event-related", provenance={})["waveforms"]
    target = tmp_path / "deep" / "w.nc"
    assert write_netcdf(target, ds) == target
    assert os.listdir(target.parent) == ["w.nc"]
    before = target.read_bytes()

    def half_written(self, path, **kwargs):
        Path(path).write_bytes(b"\x89HDF partial")
        raise OSError("No space left on device")

    monkeypatch.setattr(xr.Dataset, "to_netcdf", half_written)
    with pytest.raises(OSError, match="No space left"):
        write_netcdf(target, ds)
    assert os.listdir(target.parent) == ["w.nc"] and target.read_bytes() == before


# -- errors --------------------------------------------------------------------------------


def test_an_unknown_channel_is_refused_with_a_suggestion(oddball):
    with pytest.raises(DefinitionError, match=r'channels: channel "CZ" is not in the recording '
                                              r'\(did you mean "Cz"\?\); choose from: Fz, Cz'):
        model_arrays(oddball, design="event-related", provenance={}, channels=["CZ"])


def test_a_repeated_channel_is_refused(oddball):
    with pytest.raises(DefinitionError, match=r"names a channel twice; list each channel once"):
        model_arrays(oddball, design="event-related", provenance={}, channels=["Cz", "Cz"])


def test_the_design_must_be_the_paradigms(oddball):
    with pytest.raises(DefinitionError, match=r'design "resting" differs from the paradigm\'s design '
                                              r'"event-related"; pass source.paradigm.design'):
        model_arrays(oddball, design="resting", provenance={}, spectrum={"segment": 1.0, "overlap": 0.5})
    with pytest.raises(DefinitionError, match=r'design "event related" is not known \(did you mean '
                                              r'"event-related"\?\)'):
        model_arrays(oddball, design="event related", provenance={})


def test_settings_a_design_does_not_use_are_refused(oddball):
    with pytest.raises(DefinitionError, match=r'stimulation_frequency: stimulation_frequency is not used '
                                              r'by a "event-related" design; leave it out'):
        model_arrays(oddball, design="event-related", provenance={}, stimulation_frequency=40.0)


def test_a_stimulation_frequency_above_nyquist_is_refused(rng):
    source = _source(rng, "clicktrain", {"train": 3}, (-0.4, 0.9))
    with pytest.raises(DefinitionError, match=r"stimulation_frequency = 200.0 Hz is outside \(0, 126.571\) Hz"):
        model_arrays(source, design="steady-state", provenance={}, stimulation_frequency=200.0)


def test_resting_needs_welch_settings_with_known_keys(rest):
    with pytest.raises(DefinitionError, match=r"spectrum: a resting design needs Welch settings; pass spectrum="):
        model_arrays(rest, design="resting", provenance={})
    with pytest.raises(DefinitionError, match=r'csd: unknown setting "segmnet" \(did you mean "segment"\?\)'):
        model_arrays(rest, design="resting", provenance={}, spectrum={"segment": 1.0, "overlap": 0.5},
                     csd={"segmnet": 1.0, "overlap": 0.5})
    with pytest.raises(DefinitionError, match=r"spectrum: missing setting\(s\) overlap; pass spectrum with keys"):
        model_arrays(rest, design="resting", provenance={}, spectrum={"segment": 1.0})


def test_a_condition_missing_from_the_data_is_refused(rng):
    source = _source(rng, "oddball", {"standard": 3}, (-0.1, 0.5))
    with pytest.raises(InputDataError, match=r"source.data: no trials array for condition\(s\) deviant"):
        model_arrays(source, design="event-related", provenance={})
