"""Ocular artefact correction: EOG regression or ICA, with frontal stand-ins when no EOG was recorded.

`OcularCorrection` keeps the estimator contract (keyword parameters stored unchanged,
learned state in attributes ending with ``_``, ``fit`` returns ``self``, ``apply`` returns
a corrected copy). `record()` is the plain-data account the QC page and provenance show.

The residual-EOG metric (`eog_correlation`) is the largest absolute correlation between
an EEG channel and an EOG source, both high-passed at 1 Hz so slow drifts shared by all
channels do not count as ocular.
"""
from __future__ import annotations

import inspect
import logging
import numbers
import warnings

import numpy as np

from .errors import DefinitionError, InputDataError, ProcessingError, did_you_mean, problem
from .vocabulary import OCULAR_METHODS

__all__ = ["METHODS", "NO_SOURCE", "OcularCorrection", "eog_correlation", "max_abs_correlation", "quiet_samples"]

log = logging.getLogger(__name__)

#: Ways to correct ocular artefacts.
METHODS = OCULAR_METHODS

#: ``skipped_reason_`` when there is nothing to take the eye signal from.
NO_SOURCE = "no EOG channel and no frontal channel to stand in"

_WHERE = "OcularCorrection"

#: Least data, s, left after ``fit_reject`` for a fit.
_MIN_FIT_S = 10.0

#: ICA iteration limit (mne's "auto" value for fastica; Picard needs far fewer).
_MAX_ITER = 1000

#: At most this many samples enter the ICA fit; longer recordings are decimated (every
#: k-th sample of the whole recording, so every blink still contributes). The unmixing is
#: instantaneous, so decimating the 1 Hz high-passed copy loses little; 50 000 samples is
#: over 200 samples per free parameter of 15 components (heschl's choice; fitting on all
#: of a 15-minute recording took FastICA over a minute).
_MAX_FIT_SAMPLES = 50_000


class OcularCorrection:
    """Remove eye blinks and movements from EEG channels.

    Parameters
    ----------
    method : {"regression", "ica", "none"}, default="regression"
        ``"regression"``: subtract from every EEG channel its least-squares projection on
        the EOG source(s), with propagation factors estimated on the whole recording as in
        Gratton, Coles & Donchin (1983, Electroencephalogr Clin Neurophysiol 55:468-484),
        without their event-related averaging step. ``"ica"``: mne's ICA (Picard, fitting the
        FastICA model) and
        removal of the ocular components: with an EOG channel, those that correlate with
        it; without one, those whose topography and time course have every property of
        a blink or a horizontal eye movement (:mod:`heschl.eyecomponents`).
        ``"none"``: nothing.
    eog : sequence of str or None, default=None
        Channels to use as EOG sources; None means every channel of type ``eog``
        (except those in ``info["bads"]``).
    stand_ins : sequence of str, default=("Fp1", "Fp2", "AF7", "AF8", "AF3", "AF4")
        Frontal EEG channels whose mean stands in for a vertical EOG when no EOG channel
        was recorded (see Notes).
    ica_components : float or int, default=15
        Number of ICA components: an int is the number itself; a float in (0, 1) is the
        fraction of variance the PCA components kept before ICA must explain. A count is
        the default because a few large artefacts dominate the variance: on heschl.synth
        the fraction 0.99 kept 2-3 components, too few to separate blinks from the rest.
    max_components : int, default=15
        Upper limit on the number of ICA components (also limited by the data's rank).
    threshold : float, default=0.5
        With an EOG channel, a component whose absolute correlation with any EOG source
        exceeds this is removed, if its time course is also slow and heavy-tailed
        (:func:`heschl.eyecomponents.ocular_course`).
    limits : dict or None, default=None
        Limits of the component properties used without an EOG channel; None means
        :data:`heschl.eyecomponents.LIMITS`.
    random_state : int, default=0
        Seed of the ICA.
    high_pass : float, default=1.0
        High-pass edge, Hz, of the copy on which regression factors and ICA are estimated
        and correlations measured; ICA works better on data high-passed at about 1 Hz
        (Winkler, Debener, Mueller & Tangermann 2015, EMBC 4101-4105). Corrections are
        applied to the data as given.
    fit_reject : float or None, default=1e-3
        Peak-to-peak amplitude, V, above which a 1 s window of the high-passed copy (on any
        EEG or EOG channel used) is left out of the fit and of the residual metric,
        together with half the high-pass filter's length on either side (its ringing).
        Amplifier saturation and movement transients (millivolts) would otherwise dominate
        both; blinks and saccades stay well below 1 mV (a few hundred uV, common practice).
        None keeps every window. At least 10 s must remain, else the step is skipped.

    Attributes
    ----------
    sources_ : list of str
        Channels the eye signal is taken from (EOG channels, or the stand-ins present).
    source_labels_ : list of str
        One label per EOG source: the EOG channel names, or ``"mean(Fp1, Fp2)"`` for the
        stand-in proxy.
    stand_ins_used_ : bool
    corrected_channels_ : list of str
        EEG channels the correction changes: with ``"regression"`` every EEG channel that
        is not itself a source, with ``"ica"`` every EEG channel.
    measured_channels_ : list of str
        EEG channels that are not sources, over which ``residual_correlation_`` is taken.
    skipped_reason_ : str or None
        Why nothing was learned (`NO_SOURCE`, too little data below ``fit_reject``, or no
        EEG channel besides the sources), else None.
    fit_excluded_s_ : float
        Seconds of data left out of the fit by ``fit_reject``.
    coef_ : ndarray, shape (n_corrected, n_sources), or None
        Regression propagation factors (V per V) for ``"regression"``.
    ica_ : mne.preprocessing.ICA or None
        The fitted ICA for ``"ica"``; its ``exclude`` lists the removed components.
    n_components_ : int or None
    fit_decim_ : int or None
        Every how many samples the ICA fit used (1 up to 50 000 samples, more for longer
        recordings); the components' properties use every sample.
    ica_converged_ : bool or None
        Whether the ICA converged within 1000 iterations (kept as data, not warned).
    selection_ : {"eog-correlation", "properties"} or None
        How ``"ica"`` chose components: by correlation with a recorded EOG channel, or,
        without one, by the properties of ocular components.
    excluded_ : list of dict
        ``{"component": int, "kind": str, "correlation": float, "source": str}`` for each
        removed ICA component (signed correlation with the source it matched best; kind
        "eog" for the correlation rule, "blink" or "saccade" for the property rule, which
        also adds ``"properties"``: the component's properties).
    component_properties_ : list of dict or None
        The properties (:func:`heschl.eyecomponents.component_properties`) of every ICA
        component (for ``"ica"``).
    component_correlations_ : ndarray, shape (n_components, n_sources), or None
        Signed correlation of every ICA component with every EOG source (for ``"ica"``),
        on the data it was fitted on; the QC page draws it.
    residual_correlation_ : dict or None
        ``{"before": float, "after": float, "by_source": {label: {"before", "after"}}}``:
        `eog_correlation` on the fitted data (windows above ``fit_reject`` left out), over
        ``measured_channels_``, before and after correction; overall and per source.
        With ``"regression"`` "after" is zero up to rounding on the data it was fitted on
        (least-squares residuals are uncorrelated with the regressors): it only confirms
        the correction ran. With ``"ica"`` it measures what the removed components left.
        An EOG channel, and even more a stand-in proxy, also records brain activity that
        nearby channels share, so "after" stays above zero for reasons other than eyes
        (most with a horizontal EOG, whose electrodes sit beside F7/F8): read it as an
        upper bound on the residual ocular signal.

    Notes
    -----
    Without an EOG channel the mean of the frontal stand-ins present serves as a vertical
    EOG proxy. This is a compromise. For ``"regression"`` the proxy also carries frontal
    brain activity, and brain activity the other channels share with it biases the
    propagation factors (usually upwards: some brain signal is subtracted and part of the
    blink stays, with the opposite sign); the stand-ins themselves are not regressed on
    a proxy made of them (they would lose their own signal), so they keep their blinks.
    ``"ica"`` is fitted on every EEG channel and corrects the stand-ins too; without an EOG
    it chooses components by their properties (topography at the frontal pole and
    left-right symmetric for blinks, lateral and antisymmetric for horizontal movements,
    correlation with virtual EOGs, slow and heavy-tailed time course), not by correlation
    with the proxy alone, so horizontal movements are found too and a fronto-central
    brain component is not removed for sharing the proxy's brain signal. The proxy then
    only serves the residual measure.
    """

    def __init__(self, method="regression", *, eog=None, stand_ins=("Fp1", "Fp2", "AF7", "AF8", "AF3", "AF4"),
                 ica_components=15, max_components=15, threshold=0.5, limits=None, random_state=0,
                 high_pass=1.0, fit_reject=1e-3):
        self.method = method
        self.eog = eog
        self.stand_ins = stand_ins
        self.ica_components = ica_components
        self.max_components = max_components
        self.threshold = threshold
        self.limits = limits
        self.random_state = random_state
        self.high_pass = high_pass
        self.fit_reject = fit_reject

    def fit(self, raw):
        """Find the EOG source(s) and learn the correction.

        Parameters
        ----------
        raw : mne.io.BaseRaw
            Preloaded continuous data in V; not modified.

        Returns
        -------
        self : OcularCorrection
        """
        self._check_params()
        self.sources_, self.source_labels_, self.stand_ins_used_ = [], [], False
        self.corrected_channels_, self.measured_channels_, self.skipped_reason_ = [], [], None
        self.coef_, self.ica_, self.n_components_, self.excluded_ = None, None, None, []
        self.ica_converged_, self.component_correlations_ = None, None
        self.selection_, self.component_properties_, self.fit_decim_ = None, None, None
        self.residual_correlation_, self.fit_excluded_s_ = None, 0.0
        if self.method == "none":
            return self
        eeg = _eeg_names(raw)
        self.sources_, self.stand_ins_used_ = self._find_sources(raw, eeg)
        if not self.sources_:
            self.skipped_reason_ = NO_SOURCE
            log.info("Ocular correction skipped: %s", NO_SOURCE)
            return self
        self.source_labels_ = ([f"mean({', '.join(self.sources_)})"] if self.stand_ins_used_
                               else list(self.sources_))
        self.measured_channels_ = [n for n in eeg if n not in self.sources_]
        if not self.measured_channels_:
            import mne

            meg = len(mne.pick_types(raw.info, meg=True, eeg=False))
            self.skipped_reason_ = ("ocular correction covers EEG channels and this recording has only MEG sensors; "
                                    "blinks are left to epoch rejection" if meg else
                                    "no EEG channel besides the EOG sources")
            log.info("Ocular correction skipped: %s", self.skipped_reason_)
            return self
        self.corrected_channels_ = list(eeg if self.method == "ica" else self.measured_channels_)
        names = eeg if self.stand_ins_used_ else eeg + [n for n in self.sources_ if n not in eeg]
        hp = self._fit_data(_high_passed(raw, names, self.high_pass))
        if hp is None:
            return self
        src = self._source_data(hp)
        target = hp.get_data(picks=self.measured_channels_)
        before = np.abs(_correlations(target, src)).max(axis=0)
        if self.method == "regression":
            self.coef_ = _propagation(target, src)
            after = target - self.coef_ @ src
        else:
            del target  # not needed by ICA: one copy of the recording fewer while it fits
            after = self._fit_ica(hp, eeg, src)
        after = np.abs(_correlations(after, src)).max(axis=0)
        self.residual_correlation_ = {
            "before": float(before.max()), "after": float(after.max()),
            "by_source": {label: {"before": float(b), "after": float(a)}
                          for label, b, a in zip(self.source_labels_, before, after)}}
        log.info("Ocular correction (%s, sources %s): residual EOG correlation %.2f -> %.2f", self.method,
                 ", ".join(self.source_labels_), self.residual_correlation_["before"],
                 self.residual_correlation_["after"])
        return self

    def apply(self, raw, copy=True):
        """Return a corrected copy of ``raw`` (``raw`` itself is not changed), or correct
        ``raw`` itself with ``copy=False`` (no second copy of the recording).

        Parameters
        ----------
        raw : mne.io.BaseRaw
            Preloaded data with the channels seen in `fit`, V.
        copy : bool, default=True

        Returns
        -------
        corrected : mne.io.BaseRaw
        """
        if not hasattr(self, "sources_"):
            raise ProcessingError(problem(_WHERE, "apply was called before fit", "call fit(raw) first"))
        out = raw.copy() if copy else raw
        if self.method == "none" or self.skipped_reason_:
            return out
        missing = [n for n in self.corrected_channels_ + self.sources_ if n not in raw.ch_names]
        if missing:
            raise InputDataError(problem(_WHERE, f"channels {', '.join(missing[:6])} seen in fit are not in the "
                                         "data to correct", "apply the correction to the recording it was fitted on"))
        if self.method == "regression":
            src = self._source_data(raw)
            src = src - src.mean(axis=1, keepdims=True)  # move no channel's offset
            out.apply_function(lambda x: x - self.coef_ @ src, picks=self.corrected_channels_, channel_wise=False,
                               verbose="error")
        elif self.excluded_:
            self.ica_.apply(out, exclude=[e["component"] for e in self.excluded_], verbose="error")
        return out

    def record(self):
        """What was decided, as plain data for the QC page and provenance.

        Returns
        -------
        record : dict
            ``method``, ``sources`` (labels), ``eog_channels``, ``stand_ins_used``,
            ``stand_ins``, ``corrected_channels``, ``skipped_reason``, ``fit_excluded_s``
            (seconds left out of the fit by ``fit_reject``), ``regression``
            (None, or ``coefficients`` {channel: {source: V/V}}, ``max_abs_coefficient``,
            ``max_abs_channel``), ``ica`` (None, or ``n_components``, ``converged``,
            ``selection``, ``threshold``, ``limits`` (property rule only), ``excluded``: list of
            {component, kind, correlation, source[, properties]}, ``properties``: every
            component's properties or None), ``residual_correlation``
            (None, or ``before``, ``after``, ``by_source``, ``high_pass_hz``, ``n_channels``).
        """
        if not hasattr(self, "sources_"):
            raise ProcessingError(problem(_WHERE, "record was called before fit", "call fit(raw) first"))
        rec = {"method": self.method, "sources": list(self.source_labels_),
               "eog_channels": [] if self.stand_ins_used_ else list(self.sources_),
               "stand_ins_used": bool(self.stand_ins_used_),
               "stand_ins": list(self.sources_) if self.stand_ins_used_ else [],
               "corrected_channels": list(self.corrected_channels_), "skipped_reason": self.skipped_reason_,
               "fit_excluded_s": float(self.fit_excluded_s_),
               "regression": None, "ica": None, "residual_correlation": None}
        if self.coef_ is not None:
            rows = np.abs(self.coef_).max(axis=1)
            rec["regression"] = {
                "coefficients": {ch: {s: float(c) for s, c in zip(self.source_labels_, row)}
                                 for ch, row in zip(self.corrected_channels_, self.coef_)},
                "max_abs_coefficient": float(rows.max()),
                "max_abs_channel": self.corrected_channels_[int(rows.argmax())]}
        if self.ica_ is not None:
            rec["ica"] = {"n_components": int(self.n_components_), "converged": bool(self.ica_converged_),
                          "fit_decim": int(self.fit_decim_),
                          "selection": self.selection_, "threshold": float(self.threshold),
                          "limits": {k: {p: list(v) for p, v in rules.items()} for k, rules in self._limits().items()},
                          "excluded": [dict(e, properties=dict(e["properties"])) if "properties" in e else dict(e)
                                       for e in self.excluded_],
                          "properties": ([dict(p) for p in self.component_properties_]
                                         if self.component_properties_ is not None else None)}
        if self.residual_correlation_ is not None:
            rec["residual_correlation"] = dict(self.residual_correlation_, high_pass_hz=float(self.high_pass),
                                               n_channels=len(self.measured_channels_))
            rec["residual_correlation"]["by_source"] = {k: dict(v) for k, v in self.residual_correlation_[
                "by_source"].items()}
        return rec

    # -- helpers -------------------------------------------------------------------------

    def _check_params(self):
        if self.method not in METHODS:
            raise DefinitionError(problem(_WHERE, f'method "{self.method}" is not known'
                                          f"{did_you_mean(self.method, METHODS)}",
                                          f"use one of {', '.join(METHODS)}", key="method"))
        if not (isinstance(self.threshold, numbers.Real) and 0 < self.threshold < 1):
            raise DefinitionError(problem(_WHERE, f"threshold = {self.threshold!r} is not a correlation in (0, 1)",
                                          "choose e.g. 0.5", key="threshold"))
        if self.fit_reject is not None and not (isinstance(self.fit_reject, numbers.Real) and self.fit_reject > 0):
            raise DefinitionError(problem(_WHERE, f"fit_reject = {self.fit_reject!r} V is not a positive amplitude",
                                          "choose e.g. 1e-3 V (1 mV) or None", key="fit_reject"))
        if not (isinstance(self.high_pass, numbers.Real) and self.high_pass > 0):
            raise DefinitionError(problem(_WHERE, f"high_pass = {self.high_pass!r} Hz is not positive",
                                          "choose e.g. 1.0 Hz", key="high_pass"))
        n = self.ica_components
        if isinstance(n, bool) or not (isinstance(n, numbers.Integral) and n >= 2
                                       or isinstance(n, numbers.Real) and 0 < n < 1):
            raise DefinitionError(problem(_WHERE, f"ica_components = {n!r} is neither a variance fraction in (0, 1) "
                                          "nor a count of at least 2", "choose e.g. 15 or 0.99", key="ica_components"))
        if isinstance(self.max_components, bool) or not (isinstance(self.max_components, numbers.Integral)
                                                         and self.max_components >= 2):
            raise DefinitionError(problem(_WHERE, f"max_components = {self.max_components!r} is not a count of at "
                                          "least 2", "choose e.g. 15", key="max_components"))

    def _limits(self):
        from .eyecomponents import LIMITS

        return LIMITS if self.limits is None else self.limits

    def _find_sources(self, raw, eeg):
        """EOG channel names and whether they are frontal stand-ins."""
        import mne

        if self.eog is not None:
            named = [self.eog] if isinstance(self.eog, str) else list(self.eog)
            missing = [n for n in named if n not in raw.ch_names]
            if missing:
                raise InputDataError(problem(_WHERE, f"EOG channels {', '.join(missing)} are not in the recording "
                                             f"({len(raw.ch_names)} channels)", "name recorded channels in eog",
                                             key="eog"))
            eog = named
        else:
            eog = [raw.ch_names[i] for i in mne.pick_types(raw.info, eeg=False, eog=True, exclude="bads")]
        if eog:
            return eog, False
        present = [n for n in self.stand_ins if n in eeg]
        return present, bool(present)

    def _fit_data(self, hp):
        """The high-passed copy without the windows above ``fit_reject`` (None if too little is left)."""
        import mne

        sfreq = hp.info["sfreq"]
        keep = quiet_samples(hp.get_data(), sfreq, self.fit_reject, pad=_filter_reach(sfreq, self.high_pass))
        self.fit_excluded_s_ = float((~keep).sum() / sfreq)
        if keep.sum() < _MIN_FIT_S * sfreq:
            self.skipped_reason_ = (f"only {keep.sum() / sfreq:.1f} s of data below {self.fit_reject * 1e6:g} uV "
                                    f"peak-to-peak (fit_reject) to fit on; at least {_MIN_FIT_S:g} s needed")
            log.warning("Ocular correction skipped: %s", self.skipped_reason_)
            return None
        if keep.all():
            return hp
        log.info("Ocular correction: %.1f s above %g uV peak-to-peak left out of the fit", self.fit_excluded_s_,
                 self.fit_reject * 1e6)
        return mne.io.RawArray(hp.get_data()[:, keep], hp.info, verbose="error")

    def _source_data(self, raw):
        """EOG source time courses, shape (n_sources, n_times), V."""
        x = raw.get_data(picks=list(self.sources_))
        return x.mean(axis=0, keepdims=True) if self.stand_ins_used_ else x

    def _fit_ica(self, hp, eeg, src):
        """Fit ICA on the high-passed EEG and pick components; returns the corrected targets."""
        import mne

        self.n_components_ = _n_components(hp.get_data(picks=eeg), self.ica_components, self.max_components)
        self.fit_decim_ = max(1, int(np.ceil(hp.n_times / _MAX_FIT_SAMPLES)))
        seed = ({"rng": self.random_state} if "rng" in inspect.signature(mne.preprocessing.ICA).parameters
                else {"random_state": self.random_state})  # mne >= 1.13 names the seed rng
        # Picard with ortho=True, extended=True fits FastICA's model (Ablin, Cardoso &
        # Gramfort 2018) and converges in tens of iterations where FastICA ran to its limit.
        ica = mne.preprocessing.ICA(n_components=self.n_components_, method="picard", max_iter=_MAX_ITER,
                                    fit_params={"ortho": True, "extended": True}, verbose="error", **seed)
        with warnings.catch_warnings():
            # Non-convergence is recorded (ica_converged_) rather than raised as a warning.
            warnings.filterwarnings("ignore", message=".*did not converge.*")
            ica.fit(hp, picks=eeg, decim=self.fit_decim_, verbose="error")
        self.ica_converged_ = int(ica.n_iter_) < _MAX_ITER
        if not self.ica_converged_:
            log.info("ICA stopped after %d iterations without converging", _MAX_ITER)
        from .eyecomponents import component_properties, ocular_course, ocular_kind

        courses = ica.get_sources(hp).get_data()
        r = _correlations(courses, src)
        self.component_correlations_ = r
        self.component_properties_ = component_properties(ica.get_components(), courses, eeg, hp.info["sfreq"],
                                                          data=hp.get_data(picks=eeg), high_pass=self.high_pass)
        if self.stand_ins_used_:
            self.selection_ = "properties"
            for k, props in enumerate(self.component_properties_):
                kind = ocular_kind(props, self._limits())
                if kind:
                    self.excluded_.append({"component": k, "kind": kind, "correlation": float(r[k, 0]),
                                           "source": self.source_labels_[0], "properties": props})
            rule = "with every property of a blink or a horizontal eye movement"
        else:
            self.selection_ = "eog-correlation"
            for k, row in enumerate(r):
                j = int(np.abs(row).argmax())
                if abs(row[j]) > self.threshold and ocular_course(self.component_properties_[k], self._limits()):
                    self.excluded_.append({"component": k, "kind": "eog", "correlation": float(row[j]),
                                           "source": self.source_labels_[j],
                                           "properties": self.component_properties_[k]})
            rule = (f"|r| > {self.threshold:g} with {', '.join(self.source_labels_)}, slow and heavy-tailed")
        ica.exclude = [e["component"] for e in self.excluded_]
        self.ica_ = ica
        log.info("ICA: removed %d of %d components (%s)", len(self.excluded_), self.n_components_, rule)
        # In place: hp is fit's own high-passed copy and not used after this.
        corrected = ica.apply(hp, verbose="error") if self.excluded_ else hp
        return corrected.get_data(picks=self.measured_channels_)


def eog_correlation(raw, sources, *, high_pass=1.0, exclude=(), reject=None):
    """Largest absolute correlation between an EEG channel and an EOG source.

    Parameters
    ----------
    raw : mne.io.BaseRaw
        Preloaded data, V; not modified.
    sources : sequence of str or ndarray, shape (n_sources, n_times), V
        EOG channel names in ``raw``, or source time courses (e.g. a stand-in proxy).
    high_pass : float, default=1.0
        Both sides are high-passed at this edge, Hz, before correlating.
    exclude : sequence of str
        EEG channels left out (the stand-ins that make up a proxy).
    reject : float or None, default=None
        Leave out 1 s windows whose high-passed peak-to-peak exceeds this, V, on any
        channel used (as `OcularCorrection` does with ``fit_reject``).

    Returns
    -------
    r : float
        max over EEG channels and sources of |Pearson correlation|, in [0, 1].
    """
    import mne

    eeg = [n for n in _eeg_names(raw) if n not in exclude]
    if isinstance(sources, np.ndarray):
        src = mne.filter.filter_data(np.atleast_2d(sources).astype(float), raw.info["sfreq"], high_pass, None,
                                     verbose="error")
        x = _high_passed(raw, eeg, high_pass).get_data()
    else:
        names = list(sources)
        hp = _high_passed(raw, eeg + [n for n in names if n not in eeg], high_pass)
        x, src = hp.get_data(picks=eeg), hp.get_data(picks=names)
    sfreq = raw.info["sfreq"]
    keep = quiet_samples(np.vstack([x, src]), sfreq, reject, pad=_filter_reach(sfreq, high_pass))
    return max_abs_correlation(x[:, keep], src[:, keep])


def quiet_samples(x, sfreq, limit, window=1.0, pad=0.0):
    """Samples in windows whose peak-to-peak stays at or below ``limit`` on every channel.

    Parameters
    ----------
    x : ndarray, shape (n_channels, n_times), V
    sfreq : float, Hz
    limit : float or None, V
        Peak-to-peak limit; None keeps every sample.
    window : float, default=1.0
        Window length, s; consecutive, non-overlapping, the last one possibly shorter.
    pad : float, default=0.0
        Also drop this many seconds on either side of every dropped window (e.g. the
        reach of a filter applied to ``x``, whose ringing spreads a transient).

    Returns
    -------
    keep : ndarray of bool, shape (n_times,)
    """
    n_times = x.shape[-1]
    keep = np.ones(n_times, dtype=bool)
    if limit is None:
        return keep
    width = max(1, int(round(window * sfreq)))
    margin = int(round(pad * sfreq))
    for start in range(0, n_times, width):
        seg = x[:, start:start + width]
        if (seg.max(axis=1) - seg.min(axis=1)).max() > limit:
            keep[max(0, start - margin):start + width + margin] = False
    return keep


def _filter_reach(sfreq, high_pass):
    """Half the length, s, of the zero-phase FIR high-pass `_high_passed` applies."""
    import mne

    taps = mne.filter.create_filter(None, sfreq, high_pass, None, phase="zero", fir_design="firwin",
                                    verbose="error")
    return (len(taps) // 2) / sfreq


def max_abs_correlation(x, sources):
    """Largest |Pearson correlation| between any row of ``x`` and any row of ``sources``.

    Parameters
    ----------
    x : ndarray, shape (n_channels, n_times)
    sources : ndarray, shape (n_sources, n_times)

    Returns
    -------
    r : float
        In [0, 1]; 0 when either side has no variance.
    """
    return float(np.abs(_correlations(x, sources)).max(initial=0.0))


def _correlations(a, b):
    """Pearson correlations, shape (n_a, n_b); rows without variance give 0."""
    a = np.atleast_2d(a) - np.atleast_2d(a).mean(axis=-1, keepdims=True)
    b = np.atleast_2d(b) - np.atleast_2d(b).mean(axis=-1, keepdims=True)
    na, nb = np.linalg.norm(a, axis=-1), np.linalg.norm(b, axis=-1)
    denom = np.outer(na, nb)
    return np.divide(a @ b.T, denom, out=np.zeros(denom.shape), where=denom > 0)


def _propagation(target, src):
    """Least-squares factors B minimising ||target - B src||, shape (n_target, n_sources)."""
    target = target - target.mean(axis=1, keepdims=True)
    src = src - src.mean(axis=1, keepdims=True)
    coef, *_ = np.linalg.lstsq(src.T, target.T, rcond=None)
    return coef.T


def _n_components(x, fraction_or_count, cap):
    """ICA size: the variance rule (or the count), limited by ``cap`` and the data's rank."""
    eig = np.linalg.eigvalsh(np.cov(x))[::-1]
    eig = np.clip(eig, 0.0, None)
    rank = int(np.sum(eig > eig[0] * 1e-8)) if eig[0] > 0 else 0
    if isinstance(fraction_or_count, numbers.Integral):
        n = int(fraction_or_count)
    else:
        n = int(np.searchsorted(np.cumsum(eig) / eig.sum(), fraction_or_count) + 1)
    return max(2, min(n, int(cap), rank))  # mne's ICA needs at least two


def _eeg_names(raw):
    import mne

    return [raw.ch_names[i] for i in mne.pick_types(raw.info, eeg=True, meg=False, exclude="bads")]


def _high_passed(raw, names, high_pass):
    """A RawArray of ``names`` high-passed (zero-phase FIR, mne defaults) at ``high_pass`` Hz."""
    import mne

    info = mne.pick_info(raw.info, [raw.ch_names.index(n) for n in names])
    hp = mne.io.RawArray(raw.get_data(picks=names), info, verbose="error")
    return hp.filter(high_pass, None, picks="all", phase="zero", fir_design="firwin", verbose="error")
