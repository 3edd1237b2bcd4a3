"""gen2: a second synthetic EEG generator, independent of heschl.synth (tests only).

It never imports heschl: a recovery test would otherwise prove nothing. Its spatial
models (dipoles in a spherical head through mne's forward model, or an exponential
distance covariance), artefact shapes and rates and its truth are its own.

    import gen2
    truth = gen2.make_recording("x_raw.fif", paradigm="oddball", bad=["flat", "noisy"])
    study = gen2.make_study(root, n_channels=32, spatial="exponential", sensor_noise=0.3)
"""
from .bad import KINDS as BAD_KINDS
from .caps import CAPS, cap_names, positions
from .recording import make_recording, stream
from .spatial import exponential_covariance, spatial_model
from .study import ACCEPTANCE, acceptance_recording, make_study, study_toml

__all__ = ["make_recording", "make_study", "acceptance_recording", "ACCEPTANCE", "CAPS", "BAD_KINDS",
           "cap_names", "positions", "spatial_model", "exponential_covariance", "study_toml", "stream"]
