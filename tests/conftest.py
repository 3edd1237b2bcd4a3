"""Shared fixtures: the synthetic study, generated and processed once per session, and a
seeded random generator."""
import shutil

import numpy as np
import pytest


@pytest.fixture
def rng():
    """A fresh generator with a fixed seed for every test (a module may override it)."""
    return np.random.default_rng(20240611)


@pytest.fixture(scope="session")
def processed_study(tmp_path_factory):
    """The test-size Alder/Birch/Cedar study, processed with two workers.

    Returns (study, summaries). Tests must not modify these files; copy them first.
    """
    from heschl.batch import run_study
    from heschl.config import load_study
    from heschl.synth import make_study

    root = tmp_path_factory.mktemp("study")
    study = load_study(make_study(root, size="test"))
    summaries = run_study(study, jobs=2)
    return study, summaries


@pytest.fixture
def study_copy(processed_study, tmp_path):
    """A private copy of the processed study (raw files and outputs)."""
    from heschl.config import load_study

    study, _ = processed_study
    shutil.copytree(study.root, tmp_path / "study")
    return load_study(tmp_path / "study" / "study.toml")
