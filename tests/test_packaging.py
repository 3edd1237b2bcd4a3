"""The wheel ships the built-in definitions and templates (non-editable install works)."""
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    out = tmp_path_factory.mktemp("wheel")
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation",
                    "--quiet", "-w", str(out), str(ROOT)], check=True, capture_output=True)
    return next(out.glob("heschl-*.whl"))


def test_wheel_contains_definitions_and_templates(wheel):
    names = zipfile.ZipFile(wheel).namelist()
    for kind in ("paradigms", "features", "templates"):
        shipped = {Path(n).name for n in names if n.startswith(f"heschl/{kind}/")}
        expected = {p.name for p in (ROOT / kind).iterdir() if p.is_file()}
        assert expected and expected <= shipped, kind


def test_installed_wheel_finds_its_definitions_outside_the_checkout(wheel, tmp_path):
    target = tmp_path / "site"
    subprocess.run([sys.executable, "-m", "pip", "install", "--no-deps", "--quiet", "--target",
                    str(target), str(wheel)], check=True, capture_output=True)
    code = ("import heschl.config as c, heschl.pages as r; "
            "p = c.load_paradigm(c.builtin_dir('paradigms') / 'oddball.toml'); "
            "print(c.builtin_dir('templates')); print(p.name)")
    env = {"PYTHONPATH": str(target), "PATH": ""}
    done = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, env=env, check=True,
                          capture_output=True, text=True)
    where, name = done.stdout.split()
    assert Path(where).is_relative_to(target) and name == "oddball"
