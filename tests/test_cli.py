"""Command line: exit codes and one-line errors for bad input."""

from heschl.cli import main


def test_help_documents_exit_codes(capsys):
    assert main(["--help"]) == 0
    out = capsys.readouterr().out
    assert "exit codes" in out and "0  everything" in out and "2  the command line" in out


def test_no_command_is_a_usage_error():
    assert main([]) == 2


def test_unknown_option_is_a_usage_error(capsys):
    assert main(["run", "x.toml", "--fast"]) == 2


def test_missing_study_file_exits_2_with_one_line(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(["check", "nowhere.toml"]) == 2
    err = capsys.readouterr().err.strip()
    assert err == "heschl: nowhere.toml: study file not found; check the path or the name."


def test_invalid_study_exits_2_and_writes_nothing(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "study.toml").write_text('name = "x"\noutptu = "out"\n')
    assert main(["run", "study.toml"]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("heschl: study.toml: outptu: unknown key") and 'did you mean "output"' in err
    assert "\n" not in err
    assert not (tmp_path / "out").exists() and not (tmp_path / "derivatives").exists()


def test_check_lists_channels_duration_and_markers(processed_study, capsys, monkeypatch):
    study, _ = processed_study
    monkeypatch.chdir(study.root)
    assert main(["check", "study.toml"]) == 0
    out = capsys.readouterr().out.splitlines()
    birch = next(line for line in out if line.startswith("birch") and "oddball" in line)
    assert "64 ch (missing: none)" in birch and "512 Hz" in birch and "standard" in birch and "deviant" in birch
    assert out[-1] == "19 recording(s) found, 0 with problems."


def test_check_reports_unmapped_codes_as_a_problem(processed_study, tmp_path, capsys):
    study, _ = processed_study
    text = (study.root / "study.toml").read_text().replace('"11" = "standard"', '"99" = "standard"')
    text = text.replace('"12" = "deviant"', '"98" = "deviant"')
    (study.root / "broken.toml").write_text(text)
    try:
        assert main(["check", str(study.root / "broken.toml")]) == 1
    finally:
        (study.root / "broken.toml").unlink()
    out = capsys.readouterr().out
    assert "no marker of the paradigm found (codes in the file: 11, 12)" in out
