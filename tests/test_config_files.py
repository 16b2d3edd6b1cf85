"""``files`` entries: glob patterns, folders, a file listed twice (read once, with a warning
that the command line prints and the provenance keeps)."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from evtkin.cli import main as cli_main
from evtkin.config import load_config
from evtkin.errors import ConfigError
from test_bands_pipeline_lhe import lhe_text, write


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    d = tmp_path / "data"
    (d / "sub").mkdir(parents=True)
    for name, scales in (("run_1.lhe", [5.0, 15.0]), ("run_2.lhe", [25.0]),
                         ("sub/run_3.lhe", [35.0, 45.0, 55.0])):
        write(d / name, lhe_text(scales, [1.0] * len(scales)))
    (d / "notes.txt").write_text("not an event file\n")
    return d


def _config(tmp_path: Path, files: str) -> Path:
    cfg = tmp_path / "c.toml"
    cfg.write_text(f'[samples.s]\nfiles = {files}\n\n[histograms.h]\n'
                   'x = { value = "scale", bins = 6, range = [0.0, 60.0] }\n'
                   'normalise = "raw"\n\n[output]\nformats = ["json"]\n')
    return cfg


def test_patterns_and_folders_expand_in_sorted_order(tmp_path: Path, folder: Path) -> None:
    names = lambda c: [p.relative_to(folder).as_posix() for p in c.samples["s"].files]  # noqa: E731
    assert names(load_config(_config(tmp_path, '["data/run_*.lhe"]'))) == ["run_1.lhe",
                                                                            "run_2.lhe"]
    assert names(load_config(_config(tmp_path, '["data/**/*.lhe"]'))) == [
        "run_1.lhe", "run_2.lhe", "sub/run_3.lhe"]
    # a folder: its event files (not the text file, not the sub-folder)
    assert names(load_config(_config(tmp_path, '["data"]'))) == ["run_1.lhe", "run_2.lhe"]


def test_a_file_listed_twice_is_read_once_with_a_warning(tmp_path: Path, folder: Path,
                                                         capsys: pytest.CaptureFixture[str]
                                                         ) -> None:
    cfg = _config(tmp_path, '["data/run_1.lhe", "data/run_*.lhe"]')
    loaded = load_config(cfg)
    assert len(loaded.samples["s"].files) == 2
    assert any("listed twice" in w and "run_1.lhe" in w for w in loaded.warnings)
    assert cli_main(["run", str(cfg), "--out", str(tmp_path / "out"), "--jobs", "1"]) == 0
    err = capsys.readouterr().err
    assert "warning: samples.s.files[1]" in err
    assert "listed twice" in err
    prov = json.loads((tmp_path / "out" / "provenance.json").read_text())
    assert len(prov["inputs"]) == 2
    assert any("listed twice" in w for w in prov["config_warnings"])
    res = json.loads((tmp_path / "out" / "results.json").read_text())
    assert res["samples"]["s"]["xsec"]["n_events"] == 3  # run_1 (2 events) once + run_2


def test_patterns_and_folders_without_files_are_errors(tmp_path: Path, folder: Path) -> None:
    with pytest.raises(ConfigError, match=r"c\.toml:2: samples\.s\.files: the pattern "
                                          r"'data/none_\*\.lhe' matches no file"):
        load_config(_config(tmp_path, '["data/none_*.lhe"]'))
    shutil.rmtree(folder / "sub")
    (folder / "empty").mkdir()
    with pytest.raises(ConfigError, match=r"samples\.s\.files: the folder .*empty holds no "):
        load_config(_config(tmp_path, '["data/empty"]'))
