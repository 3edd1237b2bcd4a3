"""Adaptive epoch rejection: per-channel peak-to-peak thresholds learnt by cross-validation,
bad channels interpolated epoch by epoch, epochs with too many bad channels dropped.

The method of Jas et al. 2017 (docs/REFERENCES.md F34), implemented on arrays in
`heschl.numeric.crossval` (`LearntRejection`): thresholds, the number of channels it may
interpolate per epoch and the consensus (fraction of bad channels that drops an epoch)
are learnt on the *detection* copy of the trials (high-passed at 1 Hz, so slow drifts
cannot inflate peak-to-peak amplitudes). Its decisions are then applied to the
*analysis* copy (which may keep frequencies down to 0.1 Hz): the same epochs are
dropped, and the same channels are interpolated in the analysis data, with one matrix
per set of bad channels (`heschl.repair.ChannelRepair`: spherical splines for EEG, the
internal multipole basis for MEG). An epoch whose interpolated channels form a group of
neighbours larger than ``max_cluster`` is dropped too: a patch of scalp reconstructed
from its rim is a guess, not a measurement.

EEG, magnetometers and gradiometers are judged per sensor type (thresholds,
interpolation counts and consensus for each type). Arrays are in SI units inside (V, T,
T/m); thresholds are reported in uV, fT and fT/cm for people.
"""
from __future__ import annotations

import logging
import math

import numpy as np

from .errors import InputDataError, problem
from .numeric.crossval import CONSENSUS_CANDIDATES, LearntRejection, interpolation_candidates, tukey_fence
from .repair import ChannelRepair
from .sensors import DISPLAY
from .vocabulary import MIN_ADAPTIVE_EPOCHS, SENSOR_TYPES

__all__ = ["interpolation_candidates", "channel_adjacency", "interpolated_clusters",
           "adaptive_reject", "CONSENSUS_CANDIDATES", "outlier_floor", "TUKEY_K"]

log = logging.getLogger(__name__)

#: Fewest validation epochs per cross-validation fold (the fold's score compares a
#: training mean with the validation median; a median of fewer than 3 is one epoch).
MIN_VALIDATION_EPOCHS = 3

#: Fence factor k of Tukey's outlier rule Q3 + k IQR (Tukey 1977; docs/REFERENCES.md F45):
#: no learnt threshold sits below its channel's "far out" fence (see `outlier_floor`).
#: With the inner fence (k = 1.5) 30 % of the epochs of a clean 32-channel recording had a
#: channel interpolated; with k = 3, 2 % (tests/test_crossval.py).
TUKEY_K = 3.0

#: Distance rule for the adjacency fallback: channels closer than this many times the
#: median nearest-neighbour distance are neighbours. On a regular grid 1.5 reaches the
#: diagonal neighbours (sqrt(2) = 1.41) but not the second ring (2).
NEIGHBOUR_DISTANCE_RATIO = 1.5


def _positions(info, where="adaptive_reject"):
    """Channel positions, m, shape (n_channels, 3); InputDataError if any is missing."""
    pos = np.array([ch["loc"][:3] for ch in info["chs"]], dtype=float)
    missing = [name for name, p in zip(info["ch_names"], pos)
               if not np.all(np.isfinite(p)) or np.allclose(p, 0.0)]
    if missing:
        shown = ", ".join(missing[:6]) + (", ..." if len(missing) > 6 else "")
        raise InputDataError(problem(
            where, f"{len(missing)} of {len(pos)} channels have no position ({shown})",
            "set a montage on the data (mne's set_montage) or drop the channels without a "
            "position before adaptive rejection", key="info"))
    return pos


def _distance_adjacency(pos):
    from scipy.spatial.distance import cdist

    dist = cdist(pos, pos)
    np.fill_diagonal(dist, np.inf)
    if len(pos) < 2:
        return np.zeros((len(pos), len(pos)), dtype=bool)
    apart = np.where(dist > _CO_LOCATED_M, dist, np.inf)  # co-located sensors do not set the scale
    nearest = apart.min(axis=1)
    radius = NEIGHBOUR_DISTANCE_RATIO * np.median(nearest[np.isfinite(nearest)]) if np.isfinite(nearest).any() else 0.0
    return dist <= max(radius, _CO_LOCATED_M)


_CO_LOCATED_M = 1e-4  # sensors closer than 0.1 mm share a location (planar gradiometer pairs)


def _adjacency(info):
    """(bool csr matrix without self-loops, ch_names in info order, source by sensor type).

    Channels of different sensor types are never neighbours. EEG adjacency comes from
    the montage (``mne.channels.find_ch_adjacency``, a Delaunay triangulation), MEG
    adjacency from the sensor positions by the distance rule (the file's sensor
    geometry, whatever its system); co-located sensors (the two planar gradiometers of
    one location) are always neighbours.
    """
    import mne
    from scipy import sparse

    names = list(info["ch_names"])
    pos = _positions(info, where="channel_adjacency")
    types = [mne.channel_type(info, i) for i in range(info["nchan"])]
    dense = np.zeros((len(names), len(names)), dtype=bool)
    sources = {}
    for kind in dict.fromkeys(types):
        idx = [i for i, t in enumerate(types) if t == kind]
        block, sources[kind] = _type_adjacency(info, idx, pos[idx], kind)
        dense[np.ix_(idx, idx)] = block
    np.fill_diagonal(dense, False)
    return sparse.csr_array(dense | dense.T), names, sources


_DISTANCE_RULE = f"distance < {NEIGHBOUR_DISTANCE_RATIO:g} x median nearest-neighbour distance"


def _type_adjacency(info, idx, pos, kind):
    import mne
    from scipy import sparse

    if kind == "eeg":
        try:
            sub = mne.pick_info(info, idx)
            with mne.utils.use_log_level("error"):
                found, found_names = mne.channels.find_ch_adjacency(sub, "eeg")
            order = [list(found_names).index(n) for n in sub["ch_names"]]
            return sparse.csr_array(found).toarray().astype(bool)[np.ix_(order, order)], "mne find_ch_adjacency"
        except Exception as exc:  # triangulation fails on coplanar or too few positions
            first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
            log.info("Adjacency from the montage failed (%s); using the distance rule", first)
    return _distance_adjacency(pos), _DISTANCE_RULE


def channel_adjacency(info):
    """Which channels are neighbours (on the scalp, or on the MEG helmet), within each sensor type.

    From ``mne.channels.find_ch_adjacency(info, "eeg")`` (for EEG, a Delaunay
    triangulation of the positions). If that fails (e.g. positions on one
    plane, or too few channels to triangulate), channels closer than 1.5 x the median
    nearest-neighbour distance are neighbours (`NEIGHBOUR_DISTANCE_RATIO`).

    Parameters
    ----------
    info : mne.Info
        Data channels (EEG, magnetometers, gradiometers) with positions.

    Returns
    -------
    adjacency : scipy.sparse.csr_array of bool, shape (n_channels, n_channels)
        Symmetric, False on the diagonal.
    ch_names : list of str
        In the order of ``info["ch_names"]``.
    """
    adjacency, names, _ = _adjacency(info)
    return adjacency, names


def interpolated_clusters(bad_mask, adjacency):
    """Size of the largest connected group of interpolated channels in each epoch.

    Parameters
    ----------
    bad_mask : ndarray of bool, shape (n_epochs, n_channels)
        True where a channel is interpolated in an epoch.
    adjacency : ndarray or scipy sparse matrix, shape (n_channels, n_channels)
        Nonzero where two channels are neighbours (the diagonal is ignored).

    Returns
    -------
    sizes : ndarray of int, shape (n_epochs,)
        0 for epochs with nothing interpolated.
    """
    from scipy import sparse
    from scipy.sparse.csgraph import connected_components

    mask = np.asarray(bad_mask, dtype=bool)
    adj = sparse.csr_array(adjacency)
    if mask.ndim != 2 or adj.shape != (mask.shape[1], mask.shape[1]):
        raise InputDataError(problem(
            "interpolated_clusters", f"bad_mask has shape {mask.shape} and adjacency {adj.shape}",
            "pass bad_mask shaped (n_epochs, n_channels) and a square adjacency of n_channels",
            key="bad_mask"))
    sizes = np.zeros(len(mask), dtype=int)
    seen = {}
    for e, row in enumerate(mask):
        idx = np.flatnonzero(row)
        if idx.size == 0:
            continue
        key = idx.tobytes()
        if key not in seen:
            _, labels = connected_components(adj[idx][:, idx], directed=False)
            seen[key] = int(np.bincount(labels).max())
        sizes[e] = seen[key]
    return sizes


def _check_arrays(epochs_data, detection_data, info, rows=None):
    # Not copied: both are only read; the kept epochs are copied before they are repaired.
    analysis = np.asarray(epochs_data, dtype=float)
    detection = np.asarray(detection_data, dtype=float)
    shape = analysis.shape if rows is None else (len(rows),) + analysis.shape[1:]
    if analysis.ndim != 3 or shape != detection.shape:
        raise InputDataError(problem(
            "adaptive_reject", f"epochs_data has shape {analysis.shape} and detection_data "
            f"{detection.shape}", "pass the same trials twice, each shaped "
            "(n_epochs, n_channels, n_times), V", key="detection_data"))
    if analysis.shape[1] != info["nchan"]:
        raise InputDataError(problem(
            "adaptive_reject", f"the data have {analysis.shape[1]} channels but info has "
            f"{info['nchan']}", "pass the info of the cut EEG channels, e.g. "
            "mne.pick_info(raw.info, mne.pick_types(raw.info, eeg=True))", key="info"))
    judged = np.isfinite(analysis).all(axis=(1, 2))
    if rows is not None:
        judged = judged[np.asarray(rows)]  # the other trials are neither judged nor repaired
    for name, finite in (("epochs_data", judged), ("detection_data", np.isfinite(detection).all(axis=(1, 2)))):
        if not finite.all():
            raise InputDataError(problem("adaptive_reject", f"{name} holds NaN or infinite values",
                                         "drop or repair those samples before rejection", key=name))
    return analysis, detection


def _data_info(info):
    types = set(info.get_channel_types())
    if not types or not types <= set(SENSOR_TYPES):
        raise InputDataError(problem(
            "adaptive_reject", f"info holds channel types {sorted(types)}, not only eeg, mag and grad",
            "pass the info of the cut data channels, e.g. "
            "mne.pick_info(raw.info, mne.pick_types(raw.info, eeg=True, meg=True))", key="info"))
    _positions(info)
    info = info.copy()
    info["bads"] = []  # every cut channel is judged; bad channels were repaired before cutting
    return info


def _folds(n_epochs, cv):
    if isinstance(cv, bool) or not isinstance(cv, (int, np.integer)) or cv < 2:
        raise InputDataError(problem("adaptive_reject", f"cv = {cv!r}",
                                     "pass the number of cross-validation folds, an integer >= 2",
                                     key="cv"))
    if n_epochs < MIN_ADAPTIVE_EPOCHS:
        raise InputDataError(problem(
            "adaptive_reject", f"{n_epochs} epochs are too few to learn rejection thresholds "
            f"by cross-validation (at least {MIN_ADAPTIVE_EPOCHS})",
            'use rejection.method = "fixed" for recordings this short', key="epochs_data"))
    folds = min(int(cv), n_epochs // MIN_VALIDATION_EPOCHS)
    if folds < cv:
        log.info("Using %d cross-validation folds instead of %d for %d epochs", folds, cv, n_epochs)
    return folds


def _decisions(labels, bad_epochs, clusters, max_cluster, consensus, types):
    """Keep mask and reasons from the learnt labels and drops plus the cluster rule.

    Parameters
    ----------
    labels : ndarray, shape (n_epochs, n_channels)
        `LearntRejection.decide` labels: 0 good, 1 beyond its threshold, 2 interpolated.
    bad_epochs : ndarray of bool, shape (n_epochs,)
        Epochs the consensus drops (reached in some sensor type).
    clusters : ndarray of int, shape (n_epochs,)
        Largest group of neighbouring interpolated channels (`interpolated_clusters`).
    max_cluster : int
    consensus : dict
        Sensor type -> the fraction of its channels that drops an epoch.
    types : list of str
        Sensor type of each channel.

    Returns
    -------
    keep : ndarray of bool, shape (n_epochs,)
    reasons : list of (str or None)
    by_consensus : ndarray of bool, shape (n_epochs,)
    """
    types = np.asarray(types)
    by_consensus = np.asarray(bad_epochs, dtype=bool)
    by_cluster = ~by_consensus & (clusters > max_cluster)
    reasons = [None] * len(labels)
    several = len(consensus) > 1
    for e in np.flatnonzero(by_consensus):
        parts = []
        for kind, fraction in consensus.items():
            cols = types == kind
            n_channels, n_bad = int(cols.sum()), int((labels[e, cols] >= 1).sum())
            needed = math.ceil(fraction * n_channels - 1e-9)
            if n_bad >= needed or not several:
                label = f" {kind.upper()}" if several else ""
                parts.append(f"{n_bad} of {n_channels}{label} channels beyond their thresholds "
                             f"(consensus drops at {needed} or more)")
        reasons[e] = "adaptive: " + "; ".join(parts or ["consensus reached"])
    for e in np.flatnonzero(by_cluster):
        reasons[e] = f"adaptive: interpolated cluster of {clusters[e]} neighbouring channels > {max_cluster}"
    return ~(by_consensus | by_cluster), reasons, by_consensus


def _fit(detection, info, folds, random_state):
    """Fit `LearntRejection` on the detection epochs; return it and its repair."""
    repair = ChannelRepair(info)
    model = LearntRejection(consensus=CONSENSUS_CANDIDATES, cv=folds, random_state=random_state, fence=TUKEY_K)
    return model.fit(detection, repair), repair


def outlier_floor(peak_to_peak):
    """Upper Tukey fence (Q3 + `TUKEY_K` IQR) of each column of ``peak_to_peak``.

    A value inside the fences is not an outlier of its own channel's distribution
    (Tukey 1977, docs/REFERENCES.md F45), so no learnt threshold is allowed below it:
    with many epochs of roughly Gaussian background and few artefacts the
    cross-validated error barely changes with the threshold, and its minimum falls near
    the median peak-to-peak of every channel (on a 64-channel recording written by an
    independent generator, tests/gen2, 99 % of 1435 oddball epochs were dropped).
    """
    return tukey_fence(peak_to_peak, TUKEY_K)


# Threshold record key per sensor type; values in the type's display unit (uV, fT, fT/cm).
_THRESHOLD_KEYS = {"eeg": "thresholds_uv", "mag": "thresholds_ft", "grad": "thresholds_ft_per_cm"}


def _record(model, names, types, candidates, folds, max_cluster, source, keep, by_consensus, interp, clusters):
    """What was learnt and decided, as JSON-ready data for the QC page."""
    sizes, counts = np.unique(clusters[~by_consensus], return_counts=True)
    thresholds = {}
    for kind in dict.fromkeys(types):
        key, factor = _THRESHOLD_KEYS[kind], DISPLAY[kind][1]
        thresholds[key] = {n: float(v) * factor for n, t, v in zip(names, types, model.thresholds_) if t == kind}
    return {
        **thresholds,
        "n_interpolate": {k: int(v) for k, v in model.n_interpolate_.items()},
        "consensus": {k: float(v) for k, v in model.consensus_.items()},
        "n_interpolate_candidates": [int(c) for c in candidates],
        "consensus_candidates": [float(c) for c in CONSENSUS_CANDIDATES],
        "cv_folds": int(folds),
        "max_cluster": int(max_cluster),
        "adjacency": source,
        "n_epochs": int(len(keep)),
        "n_kept": int(keep.sum()),
        "n_dropped": int((~keep).sum()),
        "n_dropped_consensus": int(by_consensus.sum()),
        "n_dropped_cluster": int((~keep & ~by_consensus).sum()),
        "n_epochs_interpolated": int((interp[keep].any(axis=1)).sum()),
        "interpolations_per_channel": {n: int(c) for n, c in zip(names, interp[keep].sum(axis=0))},
        "cluster_counts": {str(int(s)): int(c) for s, c in zip(sizes, counts)},
        "interpolated": [[names[c] for c in np.flatnonzero(row)] if k else []
                         for row, k in zip(interp, keep)],
    }


def adaptive_reject(epochs_data, detection_data, info, *, max_cluster=3, random_state=0, n_jobs=1, cv=5,
                    keep_labels=False, in_place=False, rows=None):
    """Learn per-channel thresholds on the detection data; drop and repair the analysis data.

    Parameters
    ----------
    epochs_data : ndarray, shape (n_epochs, n_channels, n_times), V
        Analysis trials (e.g. high-passed at 0.1 Hz). Not modified unless ``in_place``.
    detection_data : ndarray, shape (n_epochs, n_channels, n_times), V
        The same trials cut from a copy high-passed at 1 Hz; thresholds, interpolations
        and drops are learnt on these. Not modified.
    info : mne.Info
        The data channels of the arrays (EEG, magnetometers, gradiometers), in their
        order, with positions. ``info["bads"]`` is ignored: every channel is judged.
    max_cluster : int, default=3
        An epoch whose largest group of neighbouring interpolated channels is larger is
        dropped.
    random_state : int, default=0
        Seed of the assignment of epochs to cross-validation folds.
    n_jobs : int, default=1
        Accepted for callers of earlier releases; the search runs in one process.
    cv : int, default=5
        Cross-validation folds; fewer when there are less than 3 validation epochs per
        fold (at least `MIN_ADAPTIVE_EPOCHS` epochs are required).
    keep_labels : bool, default=False
        Also return the per-cell decisions as ``record["labels"]``: ndarray of int8,
        shape (n_epochs, n_channels), 0 good, 1 beyond its threshold, 2 interpolated, for
        the QC page's decision image.
    in_place : bool, default=False
        Repair the kept epochs inside ``epochs_data`` (a writeable float64 array) and
        return None for ``cleaned``: no copy of the trials.
    rows : ndarray of int or None, default=None
        With ``in_place``: the trials of ``epochs_data`` that ``detection_data`` holds
        (in order); the others are neither judged nor changed. None: all.

    Returns
    -------
    cleaned : ndarray, shape (n_kept, n_channels, n_times), V, or None
        Kept analysis epochs, flagged channels interpolated (None with ``in_place``).
    keep : ndarray of bool, shape (n_epochs,)
    reasons : list of (str or None), length n_epochs
        None for kept epochs, else ``"adaptive: ..."``.
    record : dict
        ``thresholds_uv`` / ``thresholds_ft`` / ``thresholds_ft_per_cm`` (channel -> limit,
        one key per sensor type present), ``n_interpolate`` and ``consensus`` (sensor type
        -> value), ``adjacency`` (sensor type -> how neighbours were found),
        ``n_interpolate_candidates``, ``consensus_candidates``, ``cv_folds``,
        ``max_cluster``, ``adjacency``, ``n_epochs``, ``n_kept``, ``n_dropped``,
        ``n_dropped_consensus``, ``n_dropped_cluster``, ``n_epochs_interpolated``,
        ``interpolations_per_channel`` (channel -> kept epochs), ``cluster_counts``
        (largest cluster size as text -> epochs, among those consensus kept),
        ``interpolated`` (per epoch, the channels interpolated in it; empty if dropped).
    """
    if rows is not None and not in_place:
        raise InputDataError(problem("adaptive_reject", "rows is given without in_place",
                                     "pass in_place=True with rows, or cut the trials first", key="rows"))
    analysis, detection = _check_arrays(epochs_data, detection_data, info, rows)
    info = _data_info(info)
    if isinstance(max_cluster, bool) or not isinstance(max_cluster, (int, np.integer)) or max_cluster < 1:
        raise InputDataError(problem("adaptive_reject", f"max_cluster = {max_cluster!r}",
                                     "pass a positive number of channels, e.g. 3", key="max_cluster"))
    n_epochs = len(detection)
    folds = _folds(n_epochs, cv)
    model, repair = _fit(detection, info, folds, random_state)
    labels, bad_epochs = model.decide(detection)
    interp = labels == 2
    adjacency, names, source = _adjacency(info)
    types = info.get_channel_types()
    clusters = interpolated_clusters(interp, adjacency)
    keep, reasons, by_consensus = _decisions(labels, bad_epochs, clusters, max_cluster, model.consensus_, types)
    if in_place:
        if not (isinstance(epochs_data, np.ndarray) and epochs_data.dtype == np.float64
                and epochs_data.flags.writeable):
            raise InputDataError(problem("adaptive_reject", "in_place needs a writeable float64 array",
                                         "pass such an array or in_place=False", key="epochs_data"))
        mask = interp & keep[:, None]
        if rows is not None:
            mask = np.zeros(epochs_data.shape[:2], dtype=bool)
            mask[np.asarray(rows)] = interp & keep[:, None]
        repair.apply(epochs_data, mask)
        cleaned = None
    else:
        cleaned = repair.apply(analysis[keep], interp[keep])
    record = _record(model, names, types, model.n_interpolate_candidates_, folds, max_cluster, source, keep,
                     by_consensus, interp, clusters)
    raised = model.thresholds_ > model.learnt_thresholds_
    record["threshold_floor"] = f"upper Tukey fence (Q3 + {TUKEY_K:g} IQR) of each channel's peak-to-peak values"
    record["thresholds_raised"] = {n: float(v) * DISPLAY[t][1] for n, t, v, r in
                                   zip(names, types, model.learnt_thresholds_, raised) if r}
    record["interpolation_matrices"] = int(repair.n_matrices)
    if raised.any():
        log.info("Raised %d of %d learnt thresholds to their channel's outlier fence", int(raised.sum()), len(names))
    if keep_labels:
        record["labels"] = labels.astype(np.int8)
    log.info("Adaptive rejection dropped %d of %d epochs (%.0f %%): %d by consensus, %d by "
             "interpolated cluster; %d kept epochs have interpolated channels",
             record["n_dropped"], n_epochs, 100.0 * record["n_dropped"] / n_epochs,
             record["n_dropped_consensus"], record["n_dropped_cluster"], record["n_epochs_interpolated"])
    return cleaned, keep, reasons, record
