"""Writers for the three file formats, each the way its site stores data.

- BrainVision (Alder): our own writer; header, marker file and float32 samples in µV.
- EDF+ (Birch): through edfio; 16-bit samples, physical dimension ``uV``, annotations.
- FIF (Cedar): through mne; volts, EOG channels and a stimulus channel.
- FIF (Dogwood, MEG): the same writer; magnetometers in T, planar gradiometers in T/m
  with their coil frames, a vertical EOG channel and a stimulus channel.

Every writer takes the stored signals in SI units (V at the EEG sites), shape
(n_channels, n_times), and names the files it wrote. Output bytes depend only on the
inputs (no clock, no host name).
"""
from __future__ import annotations

import datetime
from pathlib import Path

import numpy as np

__all__ = ["write_brainvision", "write_edf", "eeg_fif_info", "write_fif"]

_HEADER = """\
Brain Vision Data Exchange Header File Version 1.0
; Written by heschl.synth: synthetic data, not a real recording.

[Common Infos]
Codepage=UTF-8
DataFile={stem}.eeg
MarkerFile={stem}.vmrk
DataFormat=BINARY
; Data orientation: MULTIPLEXED=ch1,pt1, ch2,pt1 ...
DataOrientation=MULTIPLEXED
NumberOfChannels={n_channels}
; Sampling interval in microseconds
SamplingInterval={interval_us:g}

[Binary Infos]
BinaryFormat=IEEE_FLOAT_32

[Channel Infos]
; Each entry: Ch<Channel number>=<Name>,<Reference channel name>,
; <Resolution in "Unit">,<Unit>, Future extensions..
{channels}
"""

_MARKER_HEADER = """\
Brain Vision Data Exchange Marker File, Version 1.0

[Common Infos]
Codepage=UTF-8
DataFile={stem}.eeg

[Marker Infos]
; Each entry: Mk<Marker number>=<Type>,<Description>,<Position in data points>,
; <Size in data points>, <Channel number (0 = marker is related to all channels)>
; Positions count from 1.
{markers}
"""


def write_brainvision(folder, stem, data, ch_names, sfreq, *, reference, markers, start):
    """Write a BrainVision file set (.vhdr, .vmrk, .eeg) with samples in µV.

    Parameters
    ----------
    folder : path-like
        Existing folder to write into.
    stem : str
        File name without extension.
    data : ndarray, shape (n_channels, n_times)
        Stored signals, V.
    ch_names : list of str
        Channel names.
    sfreq : float
        Sampling rate, Hz.
    reference : str
        Name of the recording reference, written into each channel entry.
    markers : list of (float, str, str)
        ``(time_s, type, description)``; mne reads each as ``"type/description"``.
    start : datetime.datetime
        Start of the recording, written into the "New Segment" marker.

    Returns
    -------
    list of str
        File names written, the header first.
    """
    folder = Path(folder)
    channels = "\n".join(f"Ch{i}={name},{reference},1,µV"
                         for i, name in enumerate(ch_names, start=1))
    header = _HEADER.format(stem=stem, n_channels=len(ch_names),
                            interval_us=1e6 / sfreq, channels=channels)
    stamp = start.strftime("%Y%m%d%H%M%S") + "000000"
    entries = [f"Mk1=New Segment,,1,1,0,{stamp}"]
    for number, (time, kind, text) in enumerate(markers, start=2):
        entries.append(f"Mk{number}={kind},{text},{int(round(time * sfreq)) + 1},1,0")
    marker_text = _MARKER_HEADER.format(stem=stem, markers="\n".join(entries))
    (folder / f"{stem}.vhdr").write_text(header, encoding="utf-8", newline="\n")
    (folder / f"{stem}.vmrk").write_text(marker_text, encoding="utf-8", newline="\n")
    samples = np.ascontiguousarray((data * 1e6).T, dtype="<f4")
    (folder / f"{stem}.eeg").write_bytes(samples.tobytes())
    return [f"{stem}.vhdr", f"{stem}.vmrk", f"{stem}.eeg"]


def write_edf(path, data, ch_names, sfreq, *, annotations, patient, start, rail):
    """Write an EDF+ file with 16-bit samples in µV and text annotations.

    Parameters
    ----------
    path : path-like
        File to write (``.edf``).
    data : ndarray, shape (n_channels, n_times)
        Stored signals, V; ``n_times / sfreq`` must be a whole number of seconds.
    ch_names : list of str
        Channel labels.
    sfreq : float
        Sampling rate, Hz (a whole number).
    annotations : list of (float, str)
        ``(onset_s, text)``.
    patient : str
        Patient code for the header.
    start : datetime.datetime
        Start of the recording.
    rail : float
        Physical range is ``[-rail, rail]``, V; data must lie inside.

    Returns
    -------
    list of str
        The file name written.
    """
    import edfio

    rail_uv = rail * 1e6
    signals = [
        edfio.EdfSignal(np.clip(np.asarray(row, dtype=float) * 1e6, -rail_uv, rail_uv),
                        sampling_frequency=sfreq, label=name,
                        transducer_type="AgAgCl electrode", physical_dimension="uV",
                        physical_range=(-rail_uv, rail_uv))
        for row, name in zip(data, ch_names)
    ]
    edf = edfio.Edf(
        signals,
        patient=edfio.Patient(code=patient),
        recording=edfio.Recording(startdate=start.date()),
        starttime=start.time(),
        data_record_duration=1.0,
        annotations=[edfio.EdfAnnotation(round(onset, 6), None, text)
                     for onset, text in annotations],
    )
    edf.write(Path(path))
    return [Path(path).name]


def eeg_fif_info(ch_names, ch_types, sfreq, *, line_freq):
    """Return the measurement info of a Cedar FIF file, electrode positions included.

    Parameters
    ----------
    ch_names : list of str
        Channel names (EEG in 10-10 spelling, then EOG).
    ch_types : list of str
        mne channel types (``"eeg"`` or ``"eog"``).
    sfreq : float
        Sampling rate, Hz.
    line_freq : float
        Mains frequency, Hz.

    Returns
    -------
    mne.Info
        The channels, then the stimulus channel ``STI 014``; EEG channels carry their
        positions from :func:`heschl.synth.geometry.standard_montage`.
    """
    import mne

    from .geometry import standard_montage

    info = mne.create_info(list(ch_names) + ["STI 014"], sfreq,
                           list(ch_types) + ["stim"], verbose=False)
    info["line_freq"] = float(line_freq)
    info.set_montage(standard_montage(), on_missing="ignore", verbose=False)
    return info


def write_fif(path, data, info, *, stim, start, subject):
    """Write a FIF raw file in SI units with a stimulus channel (Cedar's EEG, Dogwood's MEG).

    Parameters
    ----------
    path : path-like
        File to write; its name must end in ``_raw.fif`` or ``_meg.fif``.
    data : ndarray, shape (n_channels - 1, n_times)
        Every channel of ``info`` but the last (the stimulus channel), in SI units
        (V for EEG and EOG; T, T/m for MEG).
    info : mne.Info
        Channel names, types, positions or coil frames and the sampling rate, from
        :func:`eeg_fif_info` or :func:`heschl.synth.meg.measurement_info`; the last
        channel is the stimulus channel. Not modified.
    stim : ndarray, shape (n_times,)
        Stimulus channel (integer codes, 0 between pulses).
    start : datetime.datetime
        Start of the recording (naive, taken as UTC).
    subject : str
        Participant id, stored as the subject's hospital id.

    Returns
    -------
    list of str
        The file name written.
    """
    import mne

    info = info.copy()
    info["subject_info"] = {"his_id": subject}
    raw = mne.io.RawArray(np.vstack([data, stim[None, :]]), info, verbose=False)
    raw.set_meas_date(start.replace(tzinfo=datetime.timezone.utc))
    raw.save(Path(path), overwrite=True, verbose=False)
    return [Path(path).name]
