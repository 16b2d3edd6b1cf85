"""Errors found while evaluating expressions name the config file, line and key (issue: they
used to name the file only)."""

from __future__ import annotations

from pathlib import Path

import pytest

from evtkin.errors import ConfigError
from evtkin.run.pipeline import run

REPO = Path(__file__).resolve().parents[1]
DY = REPO / "samples" / "toy_drellyan.lhe.gz"

BASE = f"""[samples.dy]
files = ["{DY}"]

[objects.leptons]
particles = ["light_leptons"]

"""


@pytest.mark.parametrize(("tail", "line", "message"), [
    ('[[step]]\nname = "per object"\nrequire = "leptons.pt > 20"\n', 9,
     r"step\[0\]\.require: 'leptons\.pt > 20' gives a value per object"),
    ('[histograms.h]\nx = { value = "leptons[0]", bins = 2, range = [0.0, 1.0] }\n', 8,
     r"histograms\.h\.x\.value: 'leptons\[0\]' gives objects"),
    ('[histograms.h]\nx = { value = "leptons[0].ptt", bins = 2, range = [0.0, 1.0] }\n', 8,
     r"histograms\.h\.x\.value: .*ptt"),
    ('[analysis]\nweight = "leptons.pt"\n', 8, r"analysis\.weight: 'leptons\.pt' gives a value "
                                              r"per object"),
])
def test_evaluation_errors_name_the_line(tmp_path: Path, tail: str, line: int,
                                         message: str) -> None:
    text = BASE + tail
    if "[histograms" not in tail:
        text += '\n[histograms.n]\nx = { value = "count(leptons)", bins = 3, range = [0, 3] }\n'
    if tail.startswith("[analysis]"):
        text = tail + "\n" + BASE + text[len(BASE) + len(tail):]
        line = 2
    cfg = tmp_path / "c.toml"
    cfg.write_text(text)
    with pytest.raises(ConfigError, match=rf"c\.toml:{line}: {message}"):
        run(cfg, max_events=50)
