"""How each fictional site records and stores its files.

This module is the generator's own knowledge of the sites of the synthetic study: three
EEG sites (:data:`SITES`) and one MEG site (:data:`MEG_SITES`, oddball only).
It deliberately shares no table with the pipeline: if the two agreed because they used
the same table, a recovery test could not catch a wrong entry in it.

All values are invented for the scenario (see the project's scenario page).
"""
from __future__ import annotations

from dataclasses import dataclass, field

__all__ = [
    "SITES",
    "MEG_SITES",
    "ALL_SITES",
    "CHANNELS_64",
    "CHANNELS_32",
    "COMMON_CHANNELS",
    "SiteSpec",
    "SITE_SPECS",
    "PARADIGMS",
    "GROUPS",
    "SIZES",
    "SITE_DIFFERENCE",
    "old_style_name",
]

#: The EEG sites.
SITES = ("alder", "birch", "cedar")
#: The MEG sites (their sensors are described in :mod:`heschl.synth.meg`).
MEG_SITES = ("dogwood",)
ALL_SITES = SITES + MEG_SITES
PARADIGMS = ("oddball", "clicktrain", "rest")
GROUPS = ("control", "comparison")
SIZES = ("test", "demo", "bench")

#: The 64-electrode cap of Birch and Cedar, 10-10 names.
CHANNELS_64 = (
    "Fp1", "Fp2", "AF7", "AF3", "AFz", "AF4", "AF8",
    "F7", "F5", "F3", "F1", "Fz", "F2", "F4", "F6", "F8",
    "FT7", "FC5", "FC3", "FC1", "FCz", "FC2", "FC4", "FC6", "FT8",
    "T7", "C5", "C3", "C1", "Cz", "C2", "C4", "C6", "T8",
    "TP7", "CP5", "CP3", "CP1", "CPz", "CP2", "CP4", "CP6", "TP8",
    "P7", "P5", "P3", "P1", "Pz", "P2", "P4", "P6", "P8",
    "PO7", "PO3", "POz", "PO4", "PO8", "O1", "Oz", "O2",
    "TP9", "TP10", "PO9", "PO10",
)

#: The 32-electrode cap of Alder (recorded against FCz, which is not stored).
CHANNELS_32 = (
    "Fp1", "Fp2", "F7", "F3", "Fz", "F4", "F8",
    "FC5", "FC1", "FC2", "FC6", "T7", "C3", "Cz", "C4", "T8",
    "TP9", "CP5", "CP1", "CP2", "CP6", "TP10",
    "P7", "P3", "Pz", "P4", "P8", "PO9", "O1", "Oz", "O2", "PO10",
)

#: Channels every site can provide once Alder's reference is restored.
COMMON_CHANNELS = CHANNELS_32 + ("FCz",)

# Birch writes the old 10-20 names for four temporal/parietal sites.
_OLD_NAMES = {"T7": "T3", "T8": "T4", "P7": "T5", "P8": "T6"}


def old_style_name(name):
    """Return Birch's spelling of a 10-10 channel name.

    Parameters
    ----------
    name : str
        Channel name in 10-10 spelling, e.g. ``"T7"`` or ``"Fp1"``.

    Returns
    -------
    str
        Old 10-20 name where one exists, upper case (``"T3"``, ``"FP1"``).
    """
    return _OLD_NAMES.get(name, name).upper()


@dataclass(frozen=True)
class SiteSpec:
    """What one site does when it records and stores a file.

    Parameters
    ----------
    name : str
        Site name.
    letter : str
        First letter of the site's subject ids (``"A"`` gives ``A01``).
    file_format : str
        ``"brainvision"``, ``"edf"``, ``"fif"`` (EEG) or ``"meg-fif"``.
    sfreq : float
        Sampling rate of the stored file, Hz.
    channels : tuple of str
        EEG channels stored, 10-10 spelling, in file order (none at an MEG site).
    reference : str
        Reference at recording: a channel name, ``"linked-mastoids"``, ``"average"``,
        or ``"none"`` (MEG).
    line_frequency : float
        Mains frequency at the site, Hz.
    trigger_delay_s : float
        How late every marker is stored relative to the true stimulus onset, s.
    markers : dict
        ``{paradigm: {condition: code}}``: the code or text the site stores.
    eog : tuple of str
        Bipolar EOG channels stored beside the EEG or MEG.
    modality : str
        ``"eeg"`` or ``"meg"``.
    paradigms : tuple of str
        Paradigms the site records.
    broken_leads : dict
        ``{channel: kind}``: electrodes of a worn cap whose leads are broken, bad in
        every recording of the site (10-10 names; kinds of
        :data:`heschl.synth.artefacts.BAD_KINDS`). Empty at a site with a sound cap.
    """

    name: str
    letter: str
    file_format: str
    sfreq: float
    channels: tuple
    reference: str
    line_frequency: float
    trigger_delay_s: float
    markers: dict = field(default_factory=dict)
    eog: tuple = ()
    modality: str = "eeg"
    paradigms: tuple = PARADIGMS
    broken_leads: dict = field(default_factory=dict)

    def file_channel_names(self):
        """Return the EEG channel names as the site spells them in its files."""
        if self.name == "birch":
            return [old_style_name(name) for name in self.channels]
        return list(self.channels)

    def file_names(self, subject, paradigm):
        """Return the file names of one recording, the one to open first.

        Parameters
        ----------
        subject : str
            Subject id without the ``sub-`` prefix, e.g. ``"A01"``.
        paradigm : str
            ``"oddball"``, ``"clicktrain"`` or ``"rest"``.

        Returns
        -------
        list of str
            File names; the first is the one a reader opens.
        """
        stem = f"sub-{subject}_task-{paradigm}"
        if self.file_format == "brainvision":
            return [f"{stem}_eeg.vhdr", f"{stem}_eeg.vmrk", f"{stem}_eeg.eeg"]
        if self.file_format == "edf":
            return [f"{stem}_eeg.edf"]
        if self.file_format == "meg-fif":
            return [f"{stem}_meg.fif"]
        return [f"{stem}_raw.fif"]


def _eeg_markers(standard, deviant, train, eyes_open, eyes_closed):
    """Return an EEG site's stored codes as ``{paradigm: {condition: code}}``.

    Every EEG site records the same paradigms and conditions (:data:`PARADIGMS`); only
    the code or text it stores for each condition differs.
    """
    return {
        "oddball": {"standard": standard, "deviant": deviant},
        "clicktrain": {"train": train},
        "rest": {"eyes-open": eyes_open, "eyes-closed": eyes_closed},
    }


SITE_SPECS = {
    "alder": SiteSpec(
        name="alder", letter="A", file_format="brainvision", sfreq=500.0,
        channels=CHANNELS_32, reference="FCz", line_frequency=50.0, trigger_delay_s=0.0,
        markers=_eeg_markers("standard", "deviant", "train", "eyes-open", "eyes-closed"),
    ),
    "birch": SiteSpec(
        name="birch", letter="B", file_format="edf", sfreq=512.0,
        channels=CHANNELS_64, reference="linked-mastoids", line_frequency=60.0,
        trigger_delay_s=0.018, markers=_eeg_markers("11", "12", "21", "31", "32"),
    ),
    "cedar": SiteSpec(
        name="cedar", letter="C", file_format="fif", sfreq=1000.0,
        channels=CHANNELS_64, reference="average", line_frequency=50.0, trigger_delay_s=0.0,
        markers=_eeg_markers(1, 2, 1, 10, 20), eog=("HEOG", "VEOG"),
        broken_leads={"F7": "noisy", "FC6": "flat", "CP5": "noisy", "CP2": "noisy", "P8": "flat"},
    ),
    "dogwood": SiteSpec(
        name="dogwood", letter="D", file_format="meg-fif", sfreq=1000.0,
        channels=(), reference="none", line_frequency=50.0, trigger_delay_s=0.0,
        markers={"oddball": {"standard": 1, "deviant": 2}}, eog=("EOG061",),
        modality="meg", paradigms=("oddball",),
    ),
}


#: The one planted difference between the EEG sites that a reviewer should find on the
#: study page: Cedar's cap is worn, and five of its electrodes have broken leads, so
#: every Cedar recording carries five bad channels more than the one or two drawn at
#: random (6-7 of the 33 common channels, where the other sites have 1-2). The leads lie
#: apart from each other, away from the fronto-central and posterior regions of the core
#: features, the mastoids and the frontal blink channels, so no feature is measured on a
#: repaired channel. Five, not fewer: with two recordings per site (size "test") a site
#: difference must be large to be told from chance.
SITE_DIFFERENCE = {
    "site": "cedar",
    "kind": "broken-leads",
    "channels": dict(SITE_SPECS["cedar"].broken_leads),
    "description": ("Cedar's cap is worn: five electrodes (F7, CP5 and CP2 noisy, FC6 and P8 flat) have "
                    "broken leads and are bad in every Cedar recording, on top of the one or two bad "
                    "channels drawn at random; Cedar's recordings therefore have more channels "
                    "interpolated than those of the other sites."),
}
