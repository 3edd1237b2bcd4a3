"""Definition files: the built-ins load, and every broken file is refused in one line.

Each refused file is a small valid text with one thing broken. The message must read
``<file>: <key path>: <what is wrong>; <how to fix it>.`` on a single line, starting
with the file as displayed (relative to the working directory, which the tests set to
``tmp_path``). External facts are cited by their REFERENCES.md entry ("F<n>").
"""
import os
import re
import subprocess
import sys

import numpy as np
import pytest

from heschl import config
from heschl.errors import DefinitionError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - Python 3.10 only
    import tomli as tomllib

# --------------------------------------------------------------------------- valid texts
TONES = """\
name = "tones"
design = "event-related"

[conditions.standard]
markers = ["std"]

[conditions.deviant]
markers = ["dev"]

[contrasts.mismatch]
plus = "deviant"
minus = "standard"

[cleaning]
sampling_rate = 250.0
pass_band = [0.1, 30.0]

[epochs]
window = [-0.1, 0.5]
baseline = [-0.1, 0.0]

[rejection]
method = "fixed"
peak_to_peak_uv = 100.0
min_trials = { standard = 20, deviant = 10 }
"""

CALM = """\
name = "calm"
design = "resting"

[conditions.open]
markers = ["open"]

[conditions.closed]
markers = ["closed"]

[cleaning]
sampling_rate = 250.0
pass_band = [1.0, 45.0]

[segments]
length = 2.0
overlap = 0.5

[rejection]
method = "none"
"""

# Sampled at 70 Hz: Nyquist 35 Hz, so the pass band must end below it (docs/REFERENCES.md F26).
SLOW = """\
name = "slow"
design = "steady-state"

[conditions.train]
markers = ["train"]

[cleaning]
sampling_rate = 70.0
pass_band = [1.0, 30.0]

[epochs]
window = [-0.2, 0.8]

[rejection]
method = "none"
"""

PARADIGMS = {"tones": TONES, "calm": CALM, "slow": SLOW}

TONES_FEATURES = """\
name = "tones-test"
paradigm = "tones"

[regions]
front = ["Fz", "Cz"]

[[measures]]
name = "mmn"
kind = "mean-amplitude"
signal = "mismatch"
region = "front"
window = [0.1, 0.25]
"""

CALM_FEATURES = """\
name = "calm-test"
paradigm = "calm"

[regions]
back = ["Pz", "Oz"]

[bands]
alpha = [8.0, 13.0]

[[measures]]
kind = "band-power"
signal = ["open", "closed"]
region = "back"
band = "alpha"
"""

SLOW_FEATURES = """\
name = "slow-test"
paradigm = "slow"

[regions]
front = ["Fz", "Cz"]

[[measures]]
name = "itpc_20"
kind = "itpc"
signal = "train"
region = "front"
frequency = 20.0
window = [0.1, 0.5]
"""

FEATURES = {"tones": TONES_FEATURES, "calm": CALM_FEATURES, "slow": SLOW_FEATURES}

STUDY = """\
name = "pilot"
participants = "participants.tsv"

[[analyses]]
paradigm = "oddball"
feature_sets = ["oddball-core"]

[sites.alpha]
line_frequency = 50
files = { oddball = "raw/alpha/*.vhdr" }

[sites.alpha.markers.oddball]
S1 = "standard"
S2 = "deviant"
"""


def _edit(text, old, new):
    """Replace one exact piece of a valid text; fail loudly if the base text changed."""
    assert text.count(old) == 1, f"base text no longer contains {old!r} exactly once"
    return text.replace(old, new)


@pytest.fixture
def workdir(tmp_path, monkeypatch):
    """tmp_path as working directory, so files display as their bare names."""
    tmp_path = tmp_path.resolve()
    monkeypatch.chdir(tmp_path)
    (tmp_path / "participants.tsv").write_text("participant_id\tsite\nsub-01\talpha\n")
    return tmp_path


def _paradigm(workdir, name):
    path = workdir / f"{name}-paradigm.toml"
    path.write_text(PARADIGMS[name])
    return config.load_paradigm(path)


# --------------------------------------------------------------------------- built-ins
def test_builtin_names_match_files():
    for kind in ("paradigms", "features"):
        stems = sorted(p.stem for p in config.builtin_dir(kind).glob("*.toml"))
        assert stems and config.builtin_names(kind) == stems


@pytest.mark.parametrize("name", config.builtin_names("paradigms"))
def test_builtin_paradigm_loads(name):
    paradigm = config.load_paradigm(config.builtin_dir("paradigms") / f"{name}.toml")
    assert paradigm.name == name
    assert (paradigm.epochs is None) != (paradigm.segments is None)
    assert (paradigm.segments is not None) == (paradigm.design == "resting")
    low, high = paradigm.cleaning.pass_band
    assert 0 < low < high < paradigm.cleaning.sampling_rate / 2  # docs/REFERENCES.md F26


@pytest.mark.parametrize("name", config.builtin_names("features"))
def test_builtin_feature_set_loads_with_its_paradigm(name):
    path = config.builtin_dir("features") / f"{name}.toml"
    with open(path, "rb") as fh:
        target = tomllib.load(fh)["paradigm"]
    paradigm = config.load_paradigm(config.builtin_dir("paradigms") / f"{target}.toml")
    features = config.load_feature_set(path, paradigm)
    assert features.name == name and features.paradigm == paradigm.name
    names = [m.name for m in features.measures]
    assert names and len(set(names)) == len(names)


def test_oddball_values_are_si():
    p = config.load_paradigm(config.builtin_dir("paradigms") / "oddball.toml")
    assert p.design == "event-related"
    assert p.rejection.method == "adaptive"
    assert p.rejection.peak_to_peak is None
    assert p.rejection.detection_high_pass == 1.0  # Hz
    assert p.rejection.max_cluster == 3
    assert p.rejection.min_trials == {"standard": 100, "deviant": 30}
    assert p.cleaning.sampling_rate == 250.0  # Hz
    assert p.cleaning.pass_band == (0.1, 30.0)  # Hz
    assert p.epochs.window == (-0.1, 0.5)  # s
    assert p.epochs.baseline == (-0.1, 0.0)  # s
    assert p.epochs.skip == (config.SkipRule("standard", "deviant"),)
    assert p.contrasts["mismatch"] == config.Contrast("mismatch", "deviant", "standard")
    assert p.signals == ["standard", "deviant", "mismatch"]


def test_clicktrain_and_rest_values_are_si():
    folder = config.builtin_dir("paradigms")
    click = config.load_paradigm(folder / "clicktrain.toml")
    assert click.stimulation == {"frequency": 40.0, "duration": 0.5}  # Hz, s
    assert click.epochs.window == (-0.4, 0.9)  # s
    assert click.rejection.peak_to_peak == pytest.approx(120e-6, rel=1e-12)  # V
    rest = config.load_paradigm(folder / "rest.toml")
    assert rest.epochs is None
    assert rest.segments == config.SegmentSpec(length=2.0, overlap=0.0, skip_start=2.0)
    assert rest.rejection.peak_to_peak == pytest.approx(150e-6, rel=1e-12)  # V


def test_builtin_feature_values():
    folders = config.builtin_dir("paradigms"), config.builtin_dir("features")
    oddball = config.load_paradigm(folders[0] / "oddball.toml")
    core = config.load_feature_set(folders[1] / "oddball-core.toml", oddball)
    by_name = {m.name: m for m in core.measures}
    assert by_name["mismatch_mean_amplitude"].params["window"] == (0.10, 0.25)  # s
    assert by_name["mismatch_mean_amplitude"].unit == "uV"
    assert by_name["mismatch_peak_latency"].unit == "ms"
    assert by_name["mismatch_peak_latency"].params["polarity"] == "negative"
    rest = config.load_paradigm(folders[0] / "rest.toml")
    rest_core = config.load_feature_set(folders[1] / "rest-core.toml", rest)
    assert rest_core.bands["alpha"] == (8.0, 13.0)  # Hz
    # 2 kinds x 2 signals x 4 bands, the alpha ratio, and 3 kinds x 2 signals
    # (peak frequency, aperiodic exponent and offset)
    assert len(rest_core.measures) == 2 * 2 * 4 + 1 + 3 * 2
    assert "band_power_alpha_eyes_closed_posterior" in {m.name for m in rest_core.measures}
    click = config.load_paradigm(folders[0] / "clicktrain.toml")
    click_core = config.load_feature_set(folders[1] / "clicktrain-core.toml", click)
    assert {m.params["frequency"] for m in click_core.measures} == {40.0}  # Hz


def test_valid_test_texts_load(workdir):
    for name in PARADIGMS:
        paradigm = _paradigm(workdir, name)
        path = workdir / f"{name}-features.toml"
        path.write_text(FEATURES[name])
        assert config.load_feature_set(path, paradigm).measures
    calm = config.load_feature_set(workdir / "calm-features.toml", _paradigm(workdir, "calm"))
    assert [m.name for m in calm.measures] == ["band_power_alpha_open_back", "band_power_alpha_closed_back"]
    (workdir / "study.toml").write_text(STUDY)
    study = config.load_study(workdir / "study.toml")
    assert study.root == workdir.resolve()
    assert study.participants == workdir.resolve() / "participants.tsv"
    site = study.sites["alpha"]
    assert site.line_frequency == 50.0 and site.trigger_delay == 0.0  # Hz, s
    assert site.markers == {"oddball": {"S1": "standard", "S2": "deviant"}}
    assert site.subject_pattern == config.DEFAULT_SUBJECT_PATTERN


# --------------------------------------------------------------------------- invalid files
# Each case: (kind, base paradigm, text, key path, fragments of what is wrong, fix).
# kind is "paradigm", "features" (loaded against the base paradigm) or "study".
# key path None: the message names the file only (TOML syntax).
BAND_MEASURE = """\
[[measures]]
name = "alpha"
kind = "band-power"
signal = "standard"
region = "front"
band = "alpha"
"""

ITPC_40 = """\
[[measures]]
name = "itpc_40"
kind = "itpc"
signal = "train"
region = "front"
frequency = 40.0
window = [0.1, 0.5]
"""

INVALID = {
    # ---- paradigm
    "paradigm-unknown-top-key": (
        "paradigm", None, _edit(TONES, 'design = "event-related"', 'desing = "event-related"'),
        "desing", ['unknown key "desing"', 'did you mean "design"'], "use one of: cleaning, conditions"),
    "paradigm-unknown-design": (
        "paradigm", None, _edit(TONES, '"event-related"', '"event-relatd"'),
        "design", ['"event-relatd" is not a known choice', 'did you mean "event-related"'],
        "use one of: event-related, steady-state, resting"),
    "paradigm-missing-name": (
        "paradigm", None, _edit(TONES, 'name = "tones"\n', ""),
        "name", ["missing required key"], 'add "name = ..." to the file'),
    "paradigm-missing-cleaning-table": (
        "paradigm", None, _edit(TONES, "[cleaning]\nsampling_rate = 250.0\npass_band = [0.1, 30.0]\n", ""),
        "cleaning", ["missing required table"], "add a [cleaning] table"),
    "paradigm-sampling-rate-text": (
        "paradigm", None, _edit(TONES, "sampling_rate = 250.0", 'sampling_rate = "250 Hz"'),
        "cleaning.sampling_rate", ['expected a number in Hz, got "250 Hz"'], "write a plain number"),
    # docs/REFERENCES.md F26: the low-pass edge must stay below the Nyquist frequency fs/2.
    "paradigm-pass-band-at-nyquist": (
        "paradigm", None, _edit(TONES, "[0.1, 30.0]", "[0.1, 125.0]"),
        "cleaning.pass_band",
        ["upper edge 125 Hz is not below the Nyquist frequency 125 Hz of sampling_rate 250 Hz"],
        "lower the upper edge below 125 Hz or raise sampling_rate"),
    "paradigm-pass-band-above-nyquist": (  # docs/REFERENCES.md F26
        "paradigm", None, _edit(TONES, "[0.1, 30.0]", "[0.1, 200.0]"),
        "cleaning.pass_band", ["upper edge 200 Hz is not below the Nyquist frequency 125 Hz"],
        "lower the upper edge below 125 Hz or raise sampling_rate"),
    "paradigm-pass-band-from-zero": (
        "paradigm", None, _edit(TONES, "[0.1, 30.0]", "[0, 30.0]"),
        "cleaning.pass_band", ["lower edge 0 Hz must be above 0 Hz"], "use e.g. 0.1 Hz"),
    "paradigm-window-not-increasing": (
        "paradigm", None, _edit(TONES, "window = [-0.1, 0.5]", "window = [0.5, -0.1]"),
        "epochs.window", ["[0.5, -0.1] s does not increase"], "put the smaller value first"),
    "paradigm-window-infinite": (
        "paradigm", None, _edit(TONES, "window = [-0.1, 0.5]", "window = [-inf, 0.5]"),
        "epochs.window", ["expected two finite numbers [start, stop] in s, got [-inf, 0.5]"],
        "write it as [start, stop]"),
    "paradigm-window-after-marker": (
        "paradigm", None, _edit(TONES, "window = [-0.1, 0.5]", "window = [0.1, 0.5]"),
        "epochs.window", ["[0.1, 0.5] s does not include the marker at 0 s"],
        "start the window at or before 0 s"),
    "paradigm-baseline-outside-window": (
        "paradigm", None, _edit(TONES, "baseline = [-0.1, 0.0]", "baseline = [-0.2, 0.0]"),
        "epochs.baseline", ["[-0.2, 0] s is not inside the epoch window [-0.1, 0.5] s"],
        "choose a baseline inside the window"),
    "paradigm-skip-not-a-list": (
        "paradigm", None, _edit(TONES, "baseline = [-0.1, 0.0]\n", "baseline = [-0.1, 0.0]\nskip = 5\n"),
        "epochs.skip", ["expected a list of tables, got 5"], "write it as skip = ["),
    "paradigm-contrast-unknown-condition": (
        "paradigm", None, _edit(TONES, 'minus = "standard"', 'minus = "standrd"'),
        "contrasts.mismatch.minus", ['"standrd" is not a known choice', 'did you mean "standard"'],
        "use one of: standard, deviant"),
    "paradigm-contrast-plus-equals-minus": (
        "paradigm", None, _edit(TONES, 'minus = "standard"', 'minus = "deviant"'),
        "contrasts.mismatch.minus", ['plus and minus are both "deviant"'], "name two different conditions"),
    "paradigm-marker-in-two-conditions": (
        "paradigm", None, _edit(TONES, 'markers = ["dev"]', 'markers = ["dev", "std"]'),
        "conditions.deviant.markers", ['marker "std" already defines condition "standard"'],
        "give each marker to one condition"),
    "paradigm-min-trials-unknown-condition": (
        "paradigm", None, _edit(TONES, "deviant = 10 }", "deviants = 10 }"),
        "rejection.min_trials.deviants", ['unknown key "deviants"', 'did you mean "deviant"'],
        "use one of: deviant, standard"),
    "paradigm-min-trials-not-integer": (
        "paradigm", None, _edit(TONES, "deviant = 10 }", "deviant = 10.5 }"),
        "rejection.min_trials.deviant", ["expected a whole number, got 10.5"], "write a whole number"),
    "paradigm-min-trials-below-one": (
        "paradigm", None, _edit(TONES, "deviant = 10 }", "deviant = 0 }"),
        "rejection.min_trials.deviant", ["0 is below the minimum 1"], "use a whole number of at least 1"),
    "paradigm-resting-with-epochs": (
        "paradigm", None, CALM + "\n[epochs]\nwindow = [-0.1, 0.5]\n",
        "epochs", ['a "resting" paradigm is cut into segments, not epochs'],
        "replace [epochs] with [segments]"),
    "paradigm-event-related-with-segments": (
        "paradigm", None, TONES + "\n[segments]\nlength = 2.0\n",
        "segments", ['an "event-related" paradigm is cut into epochs around markers'],
        "replace [segments] with [epochs]"),
    "paradigm-segment-overlap-one": (
        "paradigm", None, _edit(CALM, "overlap = 0.5", "overlap = 1.0"),
        "segments.overlap", ["1 is out of range"], "use a value of at most 0.95"),
    "paradigm-peak-to-peak-with-method-none": (
        "paradigm", None, _edit(CALM, 'method = "none"', 'method = "none"\npeak_to_peak_uv = 100.0'),
        "rejection.peak_to_peak_uv", ['is only used with method = "fixed", not "none"'],
        'remove it or set method = "fixed"'),
    "paradigm-stimulation-at-nyquist": (
        "paradigm", None, TONES + "\n[stimulation]\nfrequency = 125.0\n",
        "stimulation.frequency", ["125 Hz is not below the Nyquist frequency 125 Hz"],
        "raise cleaning.sampling_rate"),
    "paradigm-invalid-toml": (
        "paradigm", None, _edit(TONES, 'name = "tones"', 'name = "tones'),
        None, ["not valid TOML (", "line 1"], "fix the syntax at that line"),
    # ---- feature set
    "features-unknown-top-key": (
        "features", "tones", _edit(TONES_FEATURES, "[regions]", "[regoins]"),
        "regoins", ['unknown key "regoins"', 'did you mean "regions"'], "use one of: bands, measures"),
    "features-for-another-paradigm": (
        "features", "tones", _edit(TONES_FEATURES, 'paradigm = "tones"', 'paradigm = "calm"'),
        "paradigm", ['reads paradigm "calm" but is listed with paradigm "tones"'],
        "list it under the paradigm it was written for"),
    "features-no-measures": (
        "features", "tones", TONES_FEATURES.split("[[measures]]")[0],
        "measures", ["expected at least one [[measures]] entry"], "add a [[measures]] table"),
    "features-unknown-kind": (
        "features", "tones", _edit(TONES_FEATURES, '"mean-amplitude"', '"mean-amplitud"'),
        "measures[0].kind", ['"mean-amplitud" is not a known choice', 'did you mean "mean-amplitude"'],
        "use one of: mean-amplitude, peak-amplitude"),
    "features-signal-unknown": (
        "features", "tones", _edit(TONES_FEATURES, 'signal = "mismatch"', 'signal = "mismatc"'),
        "measures[0].signal",
        ['"mismatc" is not a condition or contrast of paradigm "tones"', 'did you mean "mismatch"'],
        "use one of: standard, deviant, mismatch"),
    "features-region-undefined": (
        "features", "tones", _edit(TONES_FEATURES, 'region = "front"', 'region = "frnt"'),
        "measures[0].region", ['"frnt" is not defined under [regions]', 'did you mean "front"'],
        "define it under [regions] or use one of: front"),
    "features-key-not-used-by-kind": (
        "features", "tones", TONES_FEATURES + "frequency = 10.0\n",
        "measures[0].frequency", ['is not used by kind "mean-amplitude"'],
        'remove it; kind "mean-amplitude" takes combine, region, signal, window'),
    "features-missing-measure-key": (
        "features", "tones", _edit(TONES_FEATURES, "window = [0.1, 0.25]\n", ""),
        "measures[0].window", ["missing required key"], 'add "window = ..." to the file'),
    "features-window-outside-epoch": (
        "features", "tones", _edit(TONES_FEATURES, "[0.1, 0.25]", "[0.1, 0.6]"),
        "measures[0].window", ['[0.1, 0.6] s is not inside the epoch window [-0.1, 0.5] s of paradigm "tones"'],
        "choose a window inside it or widen the paradigm's epochs.window"),
    "features-unknown-unit": (
        "features", "tones", TONES_FEATURES + 'unit = "mV"\n',
        "measures[0].unit", ['"mV" is not a known choice'], "use one of: uV, V"),
    # docs/REFERENCES.md F26: a 40 Hz analysis needs fs > 80 Hz; at 70 Hz Nyquist is 35 Hz.
    "features-itpc-above-nyquist": (
        "features", "slow", SLOW_FEATURES + "\n" + ITPC_40,
        "measures[1].frequency", ['40 Hz is not below the Nyquist frequency 35 Hz of paradigm "slow"'],
        "raise the paradigm's cleaning.sampling_rate"),
    "features-frequency-outside-pass-band": (
        "features", "slow", _edit(SLOW_FEATURES, "frequency = 20.0", "frequency = 32.0"),
        "measures[0].frequency", ['32 Hz is outside the pass band [1, 30] Hz of paradigm "slow"'],
        "widen the pass band or choose another frequency"),
    "features-band-measure-on-event-related": (
        "features", "tones",
        TONES_FEATURES.split("[[measures]]")[0] + "[bands]\nalpha = [8.0, 13.0]\n\n" + BAND_MEASURE,
        "measures[0].kind", ['"band-power" needs a resting paradigm but "tones" is event-related'],
        "use an epoch kind"),
    "features-epoch-measure-on-resting": (
        "features", "calm",
        _edit(CALM_FEATURES, 'kind = "band-power"', 'kind = "itpc"').replace('band = "alpha"',
                                                                          "frequency = 10.0\nwindow = [0.1, 0.5]"),
        "measures[0].kind", ['"itpc" needs epochs but paradigm "calm" is cut into segments'],
        "use a band kind"),
    "features-band-undefined": (
        "features", "calm", _edit(CALM_FEATURES, 'band = "alpha"', 'band = "alfa"'),
        "measures[0].band", ['"alfa" is not defined under [bands]', 'did you mean "alpha"'],
        "define it under [bands] or use one of: alpha"),
    "features-one-name-for-many": (
        "features", "calm", CALM_FEATURES + 'name = "alpha"\n',
        "measures[0].name", ["one name for a measure that expands over several signals or bands"],
        "remove name"),
    "features-duplicate-names": (
        "features", "tones", TONES_FEATURES + "\n" + TONES_FEATURES.split("\n\n")[-1],
        "measures[1].name", ['measure name "mmn" is used twice'], "give each measure its own name"),
    "features-invalid-toml": (
        "features", "tones", _edit(TONES_FEATURES, "[[measures]]", "[[measures]"),
        None, ["not valid TOML ("], "fix the syntax at that line"),
    # ---- study
    "study-unknown-top-key": (
        "study", None, _edit(STUDY, "participants =", "partcipants ="),
        "partcipants", ['unknown key "partcipants"', 'did you mean "participants"'], "use one of: analyses"),
    "study-no-analyses": (
        "study", None, _edit(STUDY, '[[analyses]]\nparadigm = "oddball"\nfeature_sets = ["oddball-core"]\n', ""),
        "analyses", ["expected at least one [[analyses]] entry"],
        'add [[analyses]] with paradigm = "..." and feature_sets = [...]'),
    "study-unknown-builtin-paradigm": (
        "study", None, _edit(STUDY, 'paradigm = "oddball"', 'paradigm = "odball"'),
        "analyses[0].paradigm", ['no built-in paradigm named "odball"', 'did you mean "oddball"'],
        "use one of: clicktrain, oddball, rest, or a path ending in .toml"),
    "study-unknown-builtin-feature-set": (
        "study", None, _edit(STUDY, '["oddball-core"]', '["oddball-cor"]'),
        "analyses[0].feature_sets", ['no built-in feature set named "oddball-cor"', 'did you mean "oddball-core"'],
        "or a path ending in .toml"),
    "study-paradigm-listed-twice": (
        "study", None, STUDY + '\n[[analyses]]\nparadigm = "oddball"\nfeature_sets = []\n',
        "analyses[1].paradigm", ['paradigm "oddball" is listed twice'], "list each paradigm once"),
    "study-files-for-paradigm-not-analysed": (
        "study", None, _edit(STUDY, '"raw/alpha/*.vhdr" }', '"raw/alpha/*.vhdr", rest = "raw/alpha/*.edf" }'),
        "sites.alpha.files.rest", ['paradigm "rest" is not in [[analyses]]'],
        'add [[analyses]] with paradigm = "rest", or remove the pattern'),
    "study-site-missing-markers": (
        "study", None, STUDY.split("[sites.alpha.markers.oddball]")[0],
        "sites.alpha.markers.oddball", ["missing: the site's marker codes for this paradigm are not given"],
        "add [sites.alpha.markers.oddball] mapping each code"),
    "study-marker-label-unused": (
        "study", None, _edit(STUDY, 'S2 = "deviant"', 'S2 = "deviantt"'),
        "sites.alpha.markers.oddball.S2", ['"deviantt" is not a known choice', 'did you mean "deviant"'],
        "use one of: standard, deviant"),
    "study-line-frequency-55": (
        "study", None, _edit(STUDY, "line_frequency = 50", "line_frequency = 55"),
        "sites.alpha.line_frequency", ["55 Hz is not a mains frequency"], "use 50 or 60"),
    "study-site-without-files": (
        "study", None, _edit(STUDY, 'files = { oddball = "raw/alpha/*.vhdr" }\n', ""),
        "sites.alpha.files", ["missing required table"], "add a [sites.alpha.files] table"),
    "study-subject-pattern-invalid": (
        "study", None, _edit(STUDY, "line_frequency = 50\n", 'line_frequency = 50\nsubject_pattern = "sub-("\n'),
        "sites.alpha.subject_pattern", ['"sub-(" is not a valid regular expression ('], "fix the pattern"),
    "study-subject-pattern-without-group": (
        "study", None, _edit(STUDY, "line_frequency = 50\n", 'line_frequency = 50\nsubject_pattern = "sub-[0-9]+"\n'),
        "sites.alpha.subject_pattern", ['"sub-[0-9]+" has no (group) for the subject id'],
        "put the id in parentheses"),
    "study-recording-reference-misspelt": (
        "study", None, _edit(STUDY, "line_frequency = 50\n", 'line_frequency = 50\nrecording_reference = "averge"\n'),
        "sites.alpha.recording_reference", ['"averge" is not a recording-reference word', 'did you mean "average"'],
        "use one of: average, linked-mastoids, unknown, or the name of the channel the site recorded against"),
    "study-recording-reference-sentence": (
        "study", None, _edit(STUDY, "line_frequency = 50\n",
                             'line_frequency = 50\nrecording_reference = "mean of all electrodes"\n'),
        "sites.alpha.recording_reference",
        ['"mean of all electrodes" is neither a recording-reference word nor a channel name'],
        "use one of: average, linked-mastoids, unknown"),
    "study-participants-missing": (
        "study", None, _edit(STUDY, '"participants.tsv"', '"people.tsv"'),
        "participants", ['file "people.tsv" not found'],
        "give the path of a participants table relative to the study file"),
    "study-invalid-toml": (
        "study", None, _edit(STUDY, "line_frequency = 50", "line_frequency = = 50"),
        None, ["not valid TOML ("], "fix the syntax at that line"),
}


def _load(kind, base, text, workdir):
    """Write the broken text and load it; returns the path as written."""
    path = workdir / f"{kind}.toml"
    path.write_text(text)
    if kind == "paradigm":
        config.load_paradigm(path)
    elif kind == "features":
        config.load_feature_set(path, _paradigm(workdir, base))
    else:
        config.load_study(path)
    return path


@pytest.mark.parametrize("case", sorted(INVALID))
def test_invalid_file_is_refused_in_one_line(case, workdir):
    kind, base, text, key, what, fix = INVALID[case]
    shown = os.path.relpath(workdir / f"{kind}.toml")
    assert shown == f"{kind}.toml"
    head = re.escape(shown) + ": " + (re.escape(key) + ": " if key else "")
    pattern = "^" + head + r"[^\n]*" + re.escape(fix) + r"[^\n]*\.$"
    with pytest.raises(DefinitionError, match=pattern) as info:
        _load(kind, base, text, workdir)
    message = str(info.value)
    assert "\n" not in message
    what_part = message[len(shown) + 2 + (len(key) + 2 if key else 0):].split("; ")[0]
    for fragment in what:
        assert fragment in what_part, f"{fragment!r} not in what-part {what_part!r}"
    assert isinstance(info.value, ValueError)


def test_enough_distinct_invalid_files():
    texts = {(kind, text) for kind, _, text, *_ in INVALID.values()}
    assert len(texts) == len(INVALID) >= 20


def test_message_starts_with_path_as_given(tmp_path, monkeypatch):
    """A path relative to the working directory is displayed as given."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "defs").mkdir()
    (tmp_path / "defs" / "p.toml").write_text(_edit(TONES, '"event-related"', '"event-relatd"'))
    given = os.path.join("defs", "p.toml")
    with pytest.raises(DefinitionError, match="^" + re.escape(given + ": design: ")):
        config.load_paradigm(given)


@pytest.mark.parametrize("given", ["FCz", "TP9", "EEG 065", "linked-mastoids", "unknown"])
def test_recording_reference_is_a_word_or_a_channel_name(given, workdir):
    (workdir / "study.toml").write_text(
        _edit(STUDY, "line_frequency = 50\n", f'line_frequency = 50\nrecording_reference = "{given}"\n'))
    assert config.load_study(workdir / "study.toml").sites["alpha"].recording_reference == given


@pytest.mark.parametrize("given, word", [("averge", "average"), ("Average", "average"), ("AVG", "average"),
                                         ("linked mastoids", "linked-mastoids"), ("unkown", "unknown")])
def test_misspelt_recording_reference_is_refused_with_the_word(given, word, workdir):
    (workdir / "study.toml").write_text(
        _edit(STUDY, "line_frequency = 50\n", f'line_frequency = 50\nrecording_reference = "{given}"\n'))
    with pytest.raises(DefinitionError, match=r'^study\.toml: sites\.alpha\.recording_reference: '
                       + re.escape(f'"{given}" is not a recording-reference word (did you mean "{word}"?); use one '
                                   "of: average, linked-mastoids, unknown, or the name of the channel the site "
                                   "recorded against.") + "$"):
        config.load_study(workdir / "study.toml")


def test_vocabulary_is_declared_once():
    """Config and the stages hold the same objects, not copies that could drift apart."""
    from heschl import linenoise, ocular, sensors, vocabulary

    assert linenoise.METHODS is vocabulary.LINE_NOISE_METHODS is config.LINE_NOISE_METHODS
    assert ocular.METHODS is vocabulary.OCULAR_METHODS
    assert config.OCULAR_POLICIES == ("auto",) + ocular.METHODS
    assert sensors.DATA_TYPES is vocabulary.SENSOR_TYPES and sensors.DISPLAY is vocabulary.DISPLAY_UNITS
    assert {sensors.unit_type(u) for u in config.MEASURE_KINDS["band-power"][3]} == set(sensors.DATA_TYPES)


def test_error_in_named_feature_set_names_that_file(workdir):
    """A study naming a feature set of another paradigm: the message names the feature file."""
    (workdir / "study.toml").write_text(_edit(STUDY, '["oddball-core"]', '["rest-core"]'))
    shown = os.path.relpath(config.builtin_dir("features") / "rest-core.toml")
    with pytest.raises(DefinitionError, match="^" + re.escape(shown + ": paradigm: ")) as info:
        config.load_study(workdir / "study.toml")
    assert "\n" not in str(info.value)


def test_missing_file_is_refused(workdir):
    with pytest.raises(DefinitionError, match=r"^nowhere\.toml: paradigm file not found; check the path"):
        config.load_paradigm(workdir / "nowhere.toml")


# --------------------------------------------------------------------------- contracts
def test_measure_kinds_match_feature_functions():
    from heschl import features

    assert set(config.MEASURE_KINDS) == set(features.MEASURES)


def test_config_import_does_not_import_mne():
    code = "import heschl.config, sys; print('mne' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_rest_band_defaults_follow_the_ifcn_glossary():
    # docs/REFERENCES.md F14 (Kane et al. 2017, IFCN revised glossary): theta 4 to <8 Hz, alpha
    # 8-13 Hz, beta 14-30 Hz, gamma > 30 Hz; 8.0 -> alpha, 7.99 -> theta, 13.0 -> alpha,
    # 13.5 -> no band, 30.0 -> beta, 30.01 -> gamma.
    from heschl.numeric.spectra import band_power

    rest = config.load_paradigm(config.builtin_dir("paradigms") / "rest.toml")
    core = config.load_feature_set(config.builtin_dir("features") / "rest-core.toml", rest)
    assert core.bands["theta"] == (4.0, 8.0) and core.bands["alpha"] == (8.0, 13.0)
    assert core.bands["beta"] == (14.0, 30.0) and core.bands["gamma"][0] == 30.0
    grid = np.arange(0, 5001) * 0.01  # 0-50 Hz in 0.01 Hz steps: every test frequency is a bin
    owner = {}
    for f in (7.99, 8.0, 13.0, 13.5, 30.0, 30.01):
        psd = np.where(np.isclose(grid, f), 1.0, 0.0)  # all power in the bin at f
        owner[f] = [b for b in ("theta", "alpha", "beta", "gamma")
                    if band_power(grid, psd, core.bands[b], closed=core.band_closures[b]) > 0]
    assert owner == {7.99: ["theta"], 8.0: ["alpha"], 13.0: ["alpha"], 13.5: [], 30.0: ["beta"],
                     30.01: ["gamma"]}


# -- [groups]: the labels a study compares and its reference group ----------------------------


def _with_groups(text):
    return _edit(STUDY, 'participants = "participants.tsv"\n',
                 'participants = "participants.tsv"\n\n' + text + "\n")


def test_groups_declared_with_reference(workdir):
    (workdir / "study.toml").write_text(_with_groups('[groups]\nlabels = ["healthy", "patient"]\nreference = "healthy"'))
    study = config.load_study(workdir / "study.toml")
    assert study.groups == ("healthy", "patient") and study.reference_group == "healthy"


def test_groups_absent_means_no_declared_groups(workdir):
    (workdir / "study.toml").write_text(STUDY)
    study = config.load_study(workdir / "study.toml")
    assert study.groups == () and study.reference_group is None


@pytest.mark.parametrize("text, message", [
    ('[groups]\nlabels = ["healthy", "patient"]', "groups.reference: missing required key"),
    ('[groups]\nlabels = ["healthy", "patient"]\nreference = "helthy"',
     'groups.reference: "helthy" is not one of the labels (did you mean "healthy"?)'),
    ('[groups]\nlabels = ["a", "b", "c"]\nreference = "a"', "groups.labels: 3 groups declared"),
    ('[groups]\nlabels = ["a", "a"]\nreference = "a"', "groups.labels: repeats a; list each name once."),
])
def test_groups_refused_in_one_line(workdir, text, message):
    (workdir / "study.toml").write_text(_with_groups(text))
    with pytest.raises(DefinitionError) as info:
        config.load_study(workdir / "study.toml")
    assert str(info.value).startswith("study.toml: " + message), str(info.value)
    assert "\n" not in str(info.value)


def test_undeclared_group_in_participants_is_refused(workdir):
    from heschl.inputs import read_participants

    (workdir / "participants.tsv").write_text("participant_id\tgroup\nsub-01\thealthy\nsub-02\tpatinet\nsub-03\t\n")
    with pytest.raises(DefinitionError) as info:
        read_participants(workdir / "participants.tsv", ("healthy", "patient"))
    assert str(info.value) == ('participants.tsv: group "patinet" of sub-02 is not declared in the study '
                               '(did you mean "patient"?); add it to [groups] labels in the study file '
                               "(healthy, patient now) or correct the table.")
    assert read_participants(workdir / "participants.tsv") == {"sub-01": "healthy", "sub-02": "patinet",
                                                             "sub-03": "n/a"}
