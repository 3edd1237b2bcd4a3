"""Dogwood: an invented whole-head MEG site that records the oddball paradigm.

The sensor array is a helmet of :data:`N_LOCATIONS` locations on a sphere of radius
:data:`HELMET_RADIUS_M` about :data:`ORIGIN` (head coordinates: x right, y front, z up,
metres). Each location carries one magnetometer (``MEG<k>1``, T) and two orthogonal
planar gradiometers (``MEG<k>2``, ``MEG<k>3``, T/m), ``k`` a three-digit number from 1.

Fields are those of current dipoles in a spherically symmetric conductor centred at
:data:`ORIGIN`, by Sarvas' formula (Sarvas 1987, Phys. Med. Biol. 32:11-22), computed
here in numpy. A magnetometer reads the normal component B.n at its centre; a planar
gradiometer reads the difference of B.n at its centre +- 8.4 mm along its gradient
direction, divided by the 16.8 mm baseline.

A recording holds two bilateral auditory-cortex dipoles that carry the oddball's source
time course, a 1/f background from a dozen random dipoles, white sensor noise, 50 Hz
mains pick-up and, with artefacts, blinks (eye dipoles, plus a vertical EOG channel),
slow drift and two bad channels. Everything is in SI units inside: T, T/m, V, A m, s.
All values are invented for the scenario unless a comment says otherwise.

Sizes at the strongest magnetometers: the N1m about 150 fT (30 nA m per hemisphere), a
control subject's mismatch peak about 130 fT; the 1-30 Hz background is 90 fT rms at
every magnetometer and 20 fT/cm at every gradiometer, plus 16 fT (16 fT/cm) of white
sensor noise; blinks 1.4-2.4 pT at the lowest frontal magnetometers and 110-190 µV in
``EOG061``.
"""
from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
import scipy.signal

from . import artefacts as art
from .brain import SFREQ, ScalpParts, _mismatch_kernel, _oddball, _tone_kernel
from .brain import _window_mean, coloured_noise, place_kernel

__all__ = [
    "ORIGIN",
    "HELMET_RADIUS_M",
    "GRADIOMETER_HALF_BASE_M",
    "N_LOCATIONS",
    "CHANNELS",
    "MAGNETOMETERS",
    "GRADIOMETERS",
    "EOG_CHANNEL",
    "STIM_CHANNEL",
    "NAM_PER_UV",
    "AUDITORY_DIPOLES",
    "DISPLAY",
    "channel_kind",
    "helmet_locations",
    "channel_frames",
    "sarvas_field",
    "sensor_field",
    "dipole_gain",
    "auditory_field",
    "blink_field",
    "protected_channels",
    "measurement_info",
    "MegRecording",
    "simulate_oddball",
    "expected_fields",
]

#: Centre of the spherical conductor and of the helmet, head coordinates, m.
ORIGIN = np.array([0.0, 0.0, 0.04])
ORIGIN.setflags(write=False)

#: Radius of the sphere on which the sensor centres lie, m.
HELMET_RADIUS_M = 0.12

#: Half the baseline of a planar gradiometer, m (baseline 16.8 mm).
GRADIOMETER_HALF_BASE_M = 0.0084

#: Helmet rings: (elevation above the horizontal plane through ORIGIN in degrees,
#: number of locations, first azimuth, last azimuth or None for a full ring). Azimuth is
#: in degrees from the front (+y) towards the right (+x). The lowest ring leaves the
#: face free.
_RINGS = (
    (90.0, 1, 0.0, None),
    (62.0, 7, 0.0, None),
    (34.0, 12, 15.0, None),
    (6.0, 14, 0.0, None),
    (-22.0, 12, 40.0, 320.0),
)

#: Number of sensor locations on the helmet.
N_LOCATIONS = sum(ring[1] for ring in _RINGS)

#: MEG channel names in file order: for each location its magnetometer, then its two
#: gradiometers.
CHANNELS = tuple(f"MEG{k:03d}{i}" for k in range(1, N_LOCATIONS + 1) for i in (1, 2, 3))
MAGNETOMETERS = CHANNELS[0::3]
GRADIOMETERS = tuple(name for name in CHANNELS if not name.endswith("1"))

#: Vertical EOG channel stored beside the MEG, V.
EOG_CHANNEL = "EOG061"

#: Stimulus channel: standard 1, deviant 2.
STIM_CHANNEL = "STI101"

#: Unit shown to people and factor from SI for each sensor kind.
DISPLAY = {"mag": ("fT", 1e15), "grad": ("fT/cm", 1e13)}

#: Dipole moment per microvolt of the oddball's source course (brain._oddball, V at Fz),
#: A m per µV: 10 nAm per µV, so the N1 (about -3 µV) is a 30 nAm dipole per hemisphere.
NAM_PER_UV = 10.0

#: Auditory-cortex dipoles, head coordinates (m), and the direction of positive moment
#: before its radial part is removed: up and slightly forward, so a negative course (the
#: N1) is a current pointing down.
AUDITORY_DIPOLES = {
    "left": ((-0.05, -0.015, 0.045), (0.0, 0.25, 1.0)),
    "right": ((0.05, -0.015, 0.045), (0.0, 0.25, 1.0)),
}

_MU0_OVER_4PI = 1e-7                  # T m / A
# White sensor noise densities, typical of SQUID systems (values from memory, not from a
# source): 3 fT / sqrt(Hz) for magnetometers, 3 fT/cm / sqrt(Hz) for gradiometers.
_MAG_NOISE_T = 3e-15                  # T / sqrt(Hz)
_GRAD_NOISE_T_M = 3e-13               # T/m / sqrt(Hz)
# The 1/f background: rms in 1-30 Hz at every sensor of a kind. With the white noise
# this puts a control subject's mismatch peak at the six strongest magnetometers (and
# gradiometers) at about 1.2-1.3 times the 1-30 Hz background there.
_BACKGROUND = {"mag": 90e-15, "grad": 2e-12}  # T, T/m (20 fT/cm)
_N_BACKGROUND_SOURCES = 12
_BACKGROUND_RADIUS_M = (0.02, 0.07)   # distance of background dipoles from ORIGIN
_EOG_BACKGROUND_V = 2e-6              # EOG channel: 1/f activity, rms in 1-30 Hz
_EYES = ((-0.032, 0.07, -0.015), (0.032, 0.07, -0.015))  # eye dipoles, head coords, m
_EYE_MOMENT = (0.0, 0.6, 0.8)
_BLINK_T_PER_UV = 11e-15              # peak at the strongest mag per µV of blink size
_BLINK_EOG_GAIN = 0.85                # EOG061 per µV of blink size (130-220 µV)
_DRIFT_STEP = {"mag": 200e-15, "grad": 1e-12, "eog": 4e-6}  # per 2 s knot; 10 fT/cm
_LINE_UNIT = {"mag": 20e-15, "grad": 3e-13, "eog": 1e-6}    # times 1-4; 3 fT/cm
_FLAT_FRACTION = 0.01                 # flat channel: white noise, share of normal rms
_NOISY_FACTOR = 10.0                  # noisy channel: white noise, times normal rms
# Channels whose auditory field exceeds this share of the strongest of their kind are
# never made bad (as the EEG sites never spoil the fronto-central region).
_PROTECT_FRACTION = 0.5


def _read_only(array):
    """Mark ``array`` read-only (it is cached and shared) and return it."""
    array.setflags(write=False)
    return array


def channel_kind(name):
    """Return ``"mag"`` for a magnetometer name, ``"grad"`` for a gradiometer name."""
    return "mag" if name.endswith("1") else "grad"


def _kinds():
    """Kind of every MEG channel in file order, as an array of str."""
    return np.array([channel_kind(name) for name in CHANNELS])


@functools.lru_cache(maxsize=1)
def helmet_locations():
    """Return the centres and outward normals of the sensor locations.

    Returns
    -------
    positions : ndarray, shape (N_LOCATIONS, 3)
        Centres, head coordinates, m; ring by ring from the top, each ring clockwise
        seen from above starting at the front.
    normals : ndarray, shape (N_LOCATIONS, 3)
        Outward unit normals (radial from :data:`ORIGIN`).
    """
    directions = []
    for elevation, count, first, last in _RINGS:
        if last is None:
            azimuths = first + np.arange(count) * 360.0 / count
        else:
            azimuths = np.linspace(first, last, count)
        el, az = np.radians(elevation), np.radians(azimuths)
        directions += [(np.cos(el) * np.sin(a), np.cos(el) * np.cos(a), np.sin(el))
                       for a in az]
    normals = np.array(directions)
    normals /= np.linalg.norm(normals, axis=1, keepdims=True)
    positions = ORIGIN + HELMET_RADIUS_M * normals
    return _read_only(positions), _read_only(normals)


@functools.lru_cache(maxsize=1)
def channel_frames():
    """Return every MEG channel's coil frame as mne stores it in ``loc``.

    A location's first tangent ``e1`` points up along the helmet (to the front at the
    vertex), ``e2 = n x e1``. The magnetometer and the first gradiometer have
    ``ex = e1``, the second gradiometer ``ex = e2``; always ``ey = ez x ex`` and ``ez``
    the outward normal. A gradiometer measures the gradient along its ``ex``.

    Returns
    -------
    ndarray, shape (n_channels, 12)
        Centre (m), then the unit vectors ex, ey, ez, rows in :data:`CHANNELS` order.
    """
    positions, normals = helmet_locations()
    rows = []
    for centre, normal in zip(positions, normals):
        up = np.array([0.0, 0.0, 1.0])
        if abs(normal @ up) > 0.999:
            up = np.array([0.0, 1.0, 0.0])
        e1 = up - (up @ normal) * normal
        e1 /= np.linalg.norm(e1)
        e2 = np.cross(normal, e1)
        for ex in (e1, e1, e2):
            rows.append(np.concatenate([centre, ex, np.cross(normal, ex), normal]))
    return _read_only(np.array(rows))


def sarvas_field(points, dipole, moment, origin=ORIGIN):
    """Magnetic field of a current dipole in a spherically symmetric conductor.

    Sarvas 1987 (Phys. Med. Biol. 32:11-22, eq. 25), with ``r`` and ``r0`` taken from
    the sphere's centre, ``a = r - r0``::

        F  = |a| (|r| |a| + |r|^2 - r0.r)
        dF = (|a|^2/|r| + a.r/|a| + 2|a| + 2|r|) r - (|a| + 2|r| + a.r/|a|) r0
        B  = mu0 / (4 pi F^2) (F q x r0 - ((q x r0).r) dF)

    Volume currents are included; the conductivity profile does not matter, and a
    radial dipole (q parallel to r0) gives no field outside the conductor.

    Parameters
    ----------
    points : ndarray, shape (n_points, 3)
        Field points outside the conductor, m.
    dipole : array-like, shape (3,)
        Dipole position, m (inside the conductor).
    moment : array-like, shape (3,)
        Dipole moment, A m.
    origin : array-like, shape (3,), default=ORIGIN
        Centre of the sphere, m.

    Returns
    -------
    ndarray, shape (n_points, 3)
        Magnetic flux density, T.
    """
    r = np.atleast_2d(points) - origin
    r0 = np.asarray(dipole, dtype=float) - origin
    a_vec = r - r0
    a = np.linalg.norm(a_vec, axis=1)
    r_len = np.linalg.norm(r, axis=1)
    a_dot_r = np.einsum("ij,ij->i", a_vec, r)
    f = a * (r_len * a + r_len**2 - r @ r0)
    grad_f = ((a**2 / r_len + a_dot_r / a + 2 * a + 2 * r_len)[:, None] * r
              - (a + 2 * r_len + a_dot_r / a)[:, None] * r0)
    q_x_r0 = np.cross(np.asarray(moment, dtype=float), r0)
    return _MU0_OVER_4PI / f[:, None] ** 2 * (f[:, None] * q_x_r0
                                               - (r @ q_x_r0)[:, None] * grad_f)


def sensor_field(dipole, moment):
    """What every MEG channel reads from one dipole (noise-free).

    Parameters
    ----------
    dipole : array-like, shape (3,)
        Dipole position, head coordinates, m.
    moment : array-like, shape (3,)
        Dipole moment, A m.

    Returns
    -------
    ndarray, shape (n_channels,)
        Magnetometers B.n at the coil centre (T); gradiometers
        (B.n(c + d ex) - B.n(c - d ex)) / (2 d), d = 8.4 mm (T/m); :data:`CHANNELS` order.
    """
    frames = channel_frames()
    centre, ex, normal = frames[:, :3], frames[:, 3:6], frames[:, 9:12]
    d = GRADIOMETER_HALF_BASE_M

    def normal_component(points, normals):
        return np.einsum("ij,ij->i", sarvas_field(points, dipole, moment), normals)

    values = normal_component(centre, normal)
    grad = _kinds() == "grad"
    plus = normal_component(centre[grad] + d * ex[grad], normal[grad])
    minus = normal_component(centre[grad] - d * ex[grad], normal[grad])
    values[grad] = (plus - minus) / (2 * d)
    return values


def dipole_gain(dipole):
    """Field per unit moment along x, y and z: ``sensor_field(dipole, q) = gain @ q``.

    Returns
    -------
    ndarray, shape (n_channels, 3)
        T / (A m) for magnetometers, T / (m A m) for gradiometers.
    """
    return np.stack([sensor_field(dipole, axis) for axis in np.eye(3)], axis=1)


def _tangential(dipole, direction):
    """Unit vector of ``direction`` with its radial part (from ORIGIN) removed."""
    radial = np.asarray(dipole, dtype=float) - ORIGIN
    radial /= np.linalg.norm(radial)
    vector = np.asarray(direction, dtype=float)
    vector = vector - (vector @ radial) * radial
    return vector / np.linalg.norm(vector)


@functools.lru_cache(maxsize=1)
def auditory_field():
    """Field of both auditory dipoles per microvolt of the oddball's source course.

    Returns
    -------
    ndarray, shape (n_channels,)
        T per µV (magnetometers), T/m per µV (gradiometers); each hemisphere's dipole
        is :data:`NAM_PER_UV` nA m per µV along its tangential direction.
    """
    total = np.zeros(len(CHANNELS))
    for position, direction in AUDITORY_DIPOLES.values():
        moment = _tangential(position, direction) * NAM_PER_UV * 1e-9
        total += sensor_field(position, moment)
    return _read_only(total)


@functools.lru_cache(maxsize=1)
def blink_field():
    """Field of both eyes' blink dipoles, scaled so the strongest magnetometer reads 1.

    Returns
    -------
    ndarray, shape (n_channels,)
        Unitless (relative to the strongest magnetometer).
    """
    total = sum(sensor_field(eye, _EYE_MOMENT) for eye in _EYES)
    mags = _kinds() == "mag"
    return _read_only(total / np.abs(total[mags]).max())


@functools.lru_cache(maxsize=1)
def protected_channels():
    """Channels never made bad: where the auditory field is strong.

    Returns
    -------
    tuple of str
        Channels whose auditory field exceeds half the strongest of their kind.
    """
    field = np.abs(auditory_field())
    kinds = _kinds()
    strongest = {kind: field[kinds == kind].max() for kind in ("mag", "grad")}
    return tuple(name for name, value, kind in zip(CHANNELS, field, kinds)
                 if value > _PROTECT_FRACTION * strongest[kind])


def _background_patterns(rng):
    """Spatial patterns of the random background dipoles, shape (n_channels, n_sources).

    Dipoles lie 2-7 cm from ORIGIN, upper half, with random moments. As at the EEG
    sites, each row is then rescaled to unit summed power: subjects differ in the
    spatial correlation of their background, not in its level at any sensor, so a bad
    channel stands out against its own kind. (The rescaled patterns are no longer
    exact dipole fields; the auditory and eye sources are.) Unitless.
    """
    directions = rng.standard_normal((_N_BACKGROUND_SOURCES, 3))
    directions /= np.linalg.norm(directions, axis=1, keepdims=True)
    directions[:, 2] = np.abs(directions[:, 2])
    low, high = _BACKGROUND_RADIUS_M
    volume = rng.uniform(0, 1, _N_BACKGROUND_SOURCES)  # uniform in the shell's volume
    radii = (low**3 + volume * (high**3 - low**3)) ** (1 / 3)
    positions = ORIGIN + directions * radii[:, None]
    moments = rng.standard_normal((_N_BACKGROUND_SOURCES, 3))
    patterns = np.stack([sensor_field(p, m) for p, m in zip(positions, moments)], axis=1)
    return patterns / np.sqrt((patterns**2).sum(axis=1, keepdims=True))


def _white_noise_sd():
    """Per-sample sd of each MEG channel's white sensor noise at SFREQ (T or T/m)."""
    density = np.where(_kinds() == "mag", _MAG_NOISE_T, _GRAD_NOISE_T_M)
    return density * np.sqrt(SFREQ / 2.0)


def _row_units(table):
    """Per-row values of a ``{"mag", "grad", "eog"}`` table: MEG rows, then EOG061."""
    return np.append([table[kind] for kind in _kinds()], table["eog"])


def measurement_info(sfreq=SFREQ):
    """Return the mne measurement info of a Dogwood file.

    Channels: :data:`CHANNELS` (magnetometers VV_MAG_T3 in T, planar gradiometers
    VV_PLANAR_T1 in T/m, coil frames from :func:`channel_frames`), ``EOG061`` (V) and
    ``STI101``. The device frame is the head frame (``dev_head_t`` identity); the mains
    frequency is 50 Hz.

    Parameters
    ----------
    sfreq : float, default=SFREQ
        Sampling rate, Hz.

    Returns
    -------
    mne.Info
    """
    import mne

    names = list(CHANNELS) + [EOG_CHANNEL, STIM_CHANNEL]
    types = [channel_kind(name) for name in CHANNELS] + ["eog", "stim"]
    info = mne.create_info(names, sfreq, types, verbose=False)
    coils = {"mag": mne.io.constants.FIFF.FIFFV_COIL_VV_MAG_T3,
             "grad": mne.io.constants.FIFF.FIFFV_COIL_VV_PLANAR_T1}
    # Public means only: each channel's dict is filled in place, and dev_head_t and
    # line_freq are keys mne lets a user set.
    for channel, loc, kind in zip(info["chs"], channel_frames(), _kinds()):
        channel["loc"][:] = loc
        channel["coil_type"] = coils[kind]
    info["dev_head_t"] = mne.transforms.Transform("meg", "head", np.eye(4))
    info["line_freq"] = 50.0
    return info


@dataclass
class MegRecording:
    """The stored signals of one Dogwood recording and the truth of its artefacts.

    Parameters
    ----------
    data : ndarray, shape (n_channels + 1, n_times)
        MEG channels (T, T/m) in :data:`CHANNELS` order, then ``EOG061`` (V); float32.
    blinks_s : list of float
        Blink peak times, s.
    bad_channels : list of dict
        ``{"channel", "standard_name", "kind"}`` per bad channel.
    """

    data: np.ndarray
    blinks_s: list
    bad_channels: list


def _add_white_noise(dense, rng, sd, chunk=16):
    """Add independent Gaussian noise of per-row sd ``sd`` to ``dense`` in place."""
    n_rows, n_times = dense.shape
    for start in range(0, n_rows, chunk):
        rows = slice(start, min(start + chunk, n_rows))
        noise = rng.standard_normal((rows.stop - start, n_times), dtype=np.float32)
        dense[rows] += noise * sd[rows, None].astype(np.float32)


def _add_drift(dense, rng):
    """Add a slow independent random-walk drift to every row of an all-zero array.

    Uses the EEG sites' drift shape (:func:`heschl.synth.artefacts.add_drift`, steps of
    a few µV per 2 s knot), then rescales each row to this site's step (200 fT for
    magnetometers, 10 fT/cm for gradiometers, 4 µV for the EOG), so ``dense`` must
    hold nothing else yet.
    """
    art.add_drift(ScalpParts(dense), rng, SFREQ)
    dense *= (_row_units(_DRIFT_STEP) / (art._DRIFT_STEP_UV * art.UV))[:, None].astype(
        np.float32)


def _add_line_noise(parts, rng, frequency=50.0):
    """Add mains pick-up to every row: 1-4 times the row's unit, nearly in phase."""
    units = _row_units(_LINE_UNIT)
    amplitude = rng.uniform(1.0, 4.0, units.size) * units
    phase = rng.uniform(0, 2 * np.pi) + rng.normal(0.0, 0.3, units.size)
    angle = 2 * np.pi * frequency * np.arange(parts.n_times) / SFREQ
    parts.add(amplitude * np.cos(phase), np.sin(angle))
    parts.add(amplitude * np.sin(phase), np.cos(angle))


def _add_blinks(parts, rng, schedule):
    """Add blinks (frontal MEG fields and the EOG), the EEG sites' times and shape.

    Returns
    -------
    list of float
        Blink peak times, s.
    """
    times = art._blink_times(rng, schedule)
    sizes_uv = rng.uniform(*art._BLINK_UV, times.size)
    course = place_kernel(times - 0.3, art._blink_kernel(SFREQ), parts.n_times, SFREQ,
                          sizes_uv)
    pattern = np.append(blink_field() * _BLINK_T_PER_UV, _BLINK_EOG_GAIN * art.UV)
    parts.add(pattern, course)
    return times.tolist()


def _band_rms(signal, band=(1.0, 30.0)):
    """Root mean square of ``signal`` in ``band`` (Hz), zero-phase Butterworth."""
    sos = scipy.signal.butter(4, band, btype="bandpass", fs=SFREQ, output="sos")
    return float(np.sqrt(np.mean(scipy.signal.sosfiltfilt(sos, signal) ** 2)))


def _bad_channels(data, rng):
    """Make one channel flat (a magnetometer or a gradiometer) and one gradiometer noisy.

    A flat channel is replaced by white noise of 1 % of its normal 1-30 Hz rms; a noisy
    one gets white noise of ten times it added. Protected channels are never chosen.

    Returns
    -------
    list of dict
        Truth of the two bad channels, flat first.
    """
    protected = set(protected_channels())
    flat_kind = str(rng.choice(["mag", "grad"]))
    flat_pool = [n for n in CHANNELS if channel_kind(n) == flat_kind and n not in protected]
    flat = str(rng.choice(flat_pool))
    noisy_pool = [n for n in GRADIOMETERS if n not in protected and n != flat]
    noisy = str(rng.choice(noisy_pool))
    for name, kind in ((flat, "flat"), (noisy, "noisy")):
        row = CHANNELS.index(name)
        normal = _band_rms(data[row].astype(float))
        noise = rng.standard_normal(data.shape[1])
        if kind == "flat":
            data[row] = noise * _FLAT_FRACTION * normal
        else:
            data[row] += noise * _NOISY_FACTOR * normal
    return [{"channel": flat, "standard_name": flat, "kind": "flat"},
            {"channel": noisy, "standard_name": noisy, "kind": "noisy"}]


def simulate_oddball(schedule, params, streams, *, artefacts=True):
    """Simulate the stored signals of one Dogwood oddball recording at SFREQ.

    Parameters
    ----------
    schedule : heschl.synth.events.Schedule
        The oddball schedule (stimulus onsets, length).
    params : dict
        Subject parameters from :func:`heschl.synth.brain.draw_subject_params`.
    streams : mapping of str to numpy.random.Generator
        Independent random streams named ``"patterns"`` (background dipoles),
        ``"noise"`` (background courses and sensor noise), ``"blinks"``, ``"drift"``,
        ``"line"`` and ``"bad"``.
    artefacts : bool, default=True
        Add blinks, drift and two bad channels; mains pick-up is always present.

    Returns
    -------
    MegRecording
    """
    n_times = int(round(schedule.duration * SFREQ))
    n_rows = len(CHANNELS) + 1
    dense = np.zeros((n_rows, n_times), np.float32)
    if artefacts:
        _add_drift(dense, streams["drift"])
    noise_rng = streams["noise"]
    sd = np.append(_white_noise_sd(), 0.0)
    _add_white_noise(dense, noise_rng, sd)
    parts = ScalpParts(dense)
    patterns = _background_patterns(streams["patterns"])
    levels = np.array([_BACKGROUND[kind] for kind in _kinds()])
    courses = coloured_noise(noise_rng, patterns.shape[1] + 1, n_times, SFREQ)
    for pattern, course in zip(patterns.T, courses[:-1]):
        parts.add(np.append(pattern * levels, 0.0), course)
    parts.add(np.append(np.zeros(len(CHANNELS)), _EOG_BACKGROUND_V), courses[-1])
    del courses
    course_uv = _oddball(schedule, params, n_times, SFREQ) / art.UV
    parts.add(np.append(auditory_field(), 0.0), course_uv)
    blinks = _add_blinks(parts, streams["blinks"], schedule) if artefacts else []
    _add_line_noise(parts, streams["line"])
    data = parts.total()
    bad = _bad_channels(data, streams["bad"]) if artefacts else []
    return MegRecording(data=data, blinks_s=blinks, bad_channels=bad)


def expected_fields(params, sfreq=SFREQ):
    """Noise-free values of the oddball's field features, from the generator's model.

    Parameters
    ----------
    params : dict
        Subject parameters from :func:`heschl.synth.brain.draw_subject_params`.
    sfreq : float, default=SFREQ
        Rate at which waveforms are sampled for window means, Hz.

    Returns
    -------
    dict
        ``mismatch_mean_field``: per MEG channel, mean of the deviant-minus-standard
        wave over 0.10-0.25 s; ``n1_standard_mean_field``: per channel, mean of the
        standard response over 0.08-0.12 s (both in fT for magnetometers, fT/cm for
        gradiometers); ``mismatch_peak_latency_ms``; ``units``.
    """
    factor = np.array([DISPLAY[channel_kind(name)][1] for name in CHANNELS])
    field = auditory_field() * factor
    mismatch = _window_mean(_mismatch_kernel(params, sfreq) / art.UV, sfreq, (0.10, 0.25))
    n1 = _window_mean(_tone_kernel(params, sfreq) / art.UV, sfreq, (0.08, 0.12))
    return {
        "mismatch_mean_field": {n: round(float(v), 4) + 0.0
                                for n, v in zip(CHANNELS, field * mismatch)},
        "n1_standard_mean_field": {n: round(float(v), 4) + 0.0
                                   for n, v in zip(CHANNELS, field * n1)},
        "mismatch_peak_latency_ms": params["mismatch_latency_ms"],
        "units": {kind: unit for kind, (unit, _) in DISPLAY.items()},
    }
