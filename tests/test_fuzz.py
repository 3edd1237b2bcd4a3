"""Property-based fuzzing (hypothesis) of the definition loaders and the readers' front door.

Whatever a definition file or a recording file holds, heschl either accepts it or refuses
it with its own one-line error (a :class:`heschl.errors.HeschlError`): never an uncaught
exception, never a traceback. The inputs are the shipped definitions with one value
replaced, one line removed or junk added, and files of random bytes under the names of
every supported format.
"""
import re
import tempfile
from pathlib import Path

import pytest

hypothesis = pytest.importorskip("hypothesis")
from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

from heschl.errors import HeschlError  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
SETTINGS = settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])

_ASSIGNMENT = re.compile(r"^(\s*[A-Za-z0-9_.\"-]+\s*=\s*)(.+)$")


def _toml_string(text):
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


#: TOML values of every type, including the awkward ones (nan, inf, empty, nested).
VALUES = st.recursive(
    st.one_of(st.integers(-10 ** 6, 10 ** 6).map(str),
              st.floats(allow_nan=True, allow_infinity=True).map(
                  lambda x: "nan" if x != x else ("inf" if x == float("inf") else ("-inf" if x == -float("inf")
                                                                                   else repr(x)))),
              st.booleans().map(lambda b: "true" if b else "false"),
              st.text(alphabet=st.characters(min_codepoint=32, max_codepoint=0x2fff, exclude_characters="\x7f"),
                      max_size=12).map(_toml_string)),
    lambda inner: st.lists(inner, max_size=4).map(lambda xs: "[" + ", ".join(xs) + "]"),
    max_leaves=6)


@st.composite
def edited(draw, text):
    """The text with one assignment's value replaced, or one line dropped, or junk added."""
    lines = text.splitlines()
    targets = [i for i, line in enumerate(lines) if _ASSIGNMENT.match(line)]
    how = draw(st.sampled_from(["value", "drop", "junk"]))
    if how == "value":
        i = draw(st.sampled_from(targets))
        lines[i] = _ASSIGNMENT.match(lines[i]).group(1) + draw(VALUES)
    elif how == "drop":
        del lines[draw(st.integers(0, len(lines) - 1))]
    else:
        junk = draw(st.text(alphabet=st.characters(min_codepoint=32, max_codepoint=126), max_size=30))
        lines.insert(draw(st.integers(0, len(lines))), junk)
    return "\n".join(lines) + "\n"


def _one_line(exc):
    text = str(exc)
    assert "\n" not in text and "Traceback" not in text and text.strip(), text


def _loads_or_one_line(load, text, name):
    """Write ``text`` to a file called ``name`` and load it: accepted, or one line."""
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / name
        path.write_text(text, encoding="utf-8")
        try:
            load(path)
        except HeschlError as exc:
            _one_line(exc)


@SETTINGS
@given(data=st.data())
def test_a_damaged_paradigm_loads_or_fails_in_one_line(data):
    from heschl.config import load_paradigm

    text = data.draw(edited((ROOT / "paradigms" / "oddball.toml").read_text(encoding="utf-8")))
    _loads_or_one_line(load_paradigm, text, "oddball.toml")


@SETTINGS
@given(data=st.data())
def test_a_damaged_feature_set_loads_or_fails_in_one_line(data):
    from heschl.config import load_feature_set, load_paradigm

    paradigm = load_paradigm(ROOT / "paradigms" / "oddball.toml")
    text = data.draw(edited((ROOT / "features" / "oddball-core.toml").read_text(encoding="utf-8")))
    _loads_or_one_line(lambda path: load_feature_set(path, paradigm), text, "set.toml")


_STUDY = """name = "fuzz"
output = "out"
common_channels = ["Fz", "Cz"]

[groups]
labels = ["control"]

[[analyses]]
paradigm = "oddball"
feature_sets = ["oddball-core"]

[sites.lab]
recording_reference = "Cz"
line_frequency = 50.0
trigger_delay_ms = 0.0
[sites.lab.files]
oddball = "raw/sub-*_task-oddball_raw.fif"
[sites.lab.markers.oddball]
"1" = "standard"
"2" = "deviant"
"""


@SETTINGS
@given(data=st.data())
def test_a_damaged_study_file_loads_or_fails_in_one_line(data):
    from heschl.config import load_study

    _loads_or_one_line(load_study, data.draw(edited(_STUDY)), "study.toml")


@SETTINGS
@given(blob=st.binary(max_size=4096), suffix=st.sampled_from([".fif", ".edf", ".bdf", ".vhdr", ".set", ".xyz"]))
def test_random_bytes_under_any_recording_name_fail_in_one_line(blob, suffix):
    from heschl.harmonise import read_raw

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / f"sub-01_task-oddball{suffix}"
        path.write_bytes(blob)
        try:
            read_raw(path)
        except HeschlError as exc:
            _one_line(exc)
