"""The arrays the QC page draws, computed once here: the page never recomputes them."""
from __future__ import annotations

__all__ = ["curves"]


def curves(analysis, source):
    """Averages over the first region (event-related), its ITPC course (steady-state) or
    its spectra (resting), in display units, with the measure windows and pass band."""
    from ..features import spectrum_of
    from ..sensors import DISPLAY

    paradigm = analysis.paradigm
    regions = {}
    for fs in analysis.feature_sets:
        regions.update(fs.regions)
    out = {"times": source.times.tolist(), "pass_band": list(paradigm.cleaning.pass_band)}
    region = next(iter(regions), None)
    if region is None:
        return out
    picks = [source.ch_names.index(c) for c in regions[region] if c in source.ch_names]
    out["region"] = region
    unit, factor = DISPLAY[source.ch_types[picks[0]]] if picks else DISPLAY["eeg"]
    out["unit"] = unit
    windows = {m.params["window"] for fs in analysis.feature_sets for m in fs.measures if m.params.get("window")}
    out["windows"] = sorted(windows)
    if paradigm.design == "event-related":
        out["waves"] = {s: (source.average(s)[picks].mean(axis=0) * factor).tolist()
                        for s in paradigm.signals if source.n_trials(s) > 0}
    elif paradigm.design == "steady-state":
        from ..numeric.phase import itpc

        freq = paradigm.stimulation.get("frequency", 40.0)
        out["frequency"] = freq
        out["itpc"] = {c: itpc(source.coefficients(c, freq, picks), axis=0).mean(axis=0).tolist()
                       for c in paradigm.conditions if source.n_trials(c) > 1}
    else:
        spec = spectrum_of(analysis)
        out["psd"] = {}
        for c in paradigm.conditions:
            if source.n_trials(c) > 0:
                freqs, psd = source.spectrum(c, spec)
                out["freqs"] = freqs.tolist()
                out["psd"][c] = (psd[picks].mean(axis=0) * factor ** 2).tolist()
    return out
