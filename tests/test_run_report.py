"""`evtkin run` writes a self-contained HTML report next to its results."""

from __future__ import annotations

from html.parser import HTMLParser
from pathlib import Path

import evtkin

ROOT = Path(__file__).resolve().parents[1]


class _Collect(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.images: list[str] = []
        self.external: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if tag == "img":
            self.images.append(a.get("src") or "")
        for key in ("src", "href"):
            v = a.get(key) or ""
            if v.startswith(("http:", "https:", "//")):
                self.external.append(v)

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def test_run_writes_self_contained_report(tmp_path: Path) -> None:
    out = tmp_path / "dy"
    evtkin.run(ROOT / "configs" / "drell_yan.toml", out=out, max_events=400)
    page = (out / "report.html").read_text(encoding="utf-8")
    parser = _Collect()
    parser.feed(page)
    text = " ".join(parser.text)
    # every histogram of the run is shown, with its plot embedded, and nothing is fetched
    results = evtkin.load_results(out)
    for name in results["dy"]:
        assert name in text
    assert parser.images
    assert all(src.startswith("data:image/png;base64,") for src in parser.images)
    assert parser.external == []
    assert "toy data" in text  # the sample is toy data: the report must say so
    assert not (out / "INCOMPLETE").exists()
