"""HTML reports: well-formed, self-contained (no scripts, no external resources), and, where a
Chromium is installed, loaded by a real browser without errors."""

from __future__ import annotations

import base64
import os
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import pytest

from evtkin.output.compare_plots import compare_loaded
from evtkin.output.report import render_run_report, write_compare_report
from test_compare_results import NOTE, make_results, make_sample

# void elements of HTML (WHATWG HTML living standard, §13.1.2)
VOID = {
    "area",
    "base",
    "br",
    "col",
    "embed",
    "hr",
    "img",
    "input",
    "link",
    "meta",
    "source",
    "track",
    "wbr",
}


class _Checker(HTMLParser):
    """Collect tags, check nesting, record every resource reference."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.tags: list[str] = []
        self.refs: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        for k, v in attrs:
            if k in ("src", "href") and v is not None:
                self.refs.append(v)
            if k.startswith("on"):
                self.errors.append(f"event handler attribute {k} on <{tag}>")
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag: str) -> None:
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes <{self.stack[-1] if self.stack else None}>")
            return
        self.stack.pop()

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def _check_html(text: str) -> _Checker:
    assert text.startswith("<!DOCTYPE html>")
    chk = _Checker()
    chk.feed(text)
    chk.close()
    assert chk.errors == []
    assert chk.stack == []
    assert "script" not in chk.tags
    assert "link" not in chk.tags  # no external style sheets
    for ref in chk.refs:
        # only in-page anchors and embedded images
        assert ref.startswith("#") or ref.startswith("data:image/png;base64,"), ref[:60]
    for ref in chk.refs:
        if ref.startswith("data:"):
            png = base64.b64decode(ref.split(",", 1)[1], validate=True)
            assert png[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, ISO/IEC 15948)
    return chk


@pytest.fixture(scope="module")
def comparison_html(tmp_path_factory: pytest.TempPathFactory) -> tuple[str, Path]:
    std = make_results(make_sample("standard", 70, 0.0))
    dfm = make_results(make_sample("standard", 71, 0.6))
    cs = compare_loaded([std, dfm], ["run_std", "run_<dfm>"], shape_only=True)
    path = write_compare_report(cs, tmp_path_factory.mktemp("rep") / "compare.html")
    return path.read_text(encoding="utf-8"), path


def test_compare_report_self_contained_and_sorted(comparison_html: tuple[str, Path]) -> None:
    text, _ = comparison_html
    chk = _check_html(text)
    assert chk.tags.count("img") == 2  # one plot per compared 1-D histogram
    body = "".join(chk.text)
    assert NOTE in body
    assert "Gagunashvili" in body
    # the folder name with markup characters is escaped, not interpreted
    assert "run_&lt;dfm&gt;" in text
    assert "<dfm>" not in text
    # summary table order: smallest p-value first (the deformed mass distribution)
    first_row = re.search(r"<tbody><tr[^>]*><td[^>]*><a href=\"#([^\"]+)\"", text)
    assert first_row is not None
    assert first_row.group(1) == "h-m-pair"
    pos = [text.index('href="#h-m-pair"'), text.index('href="#h-pt-lep"')]
    assert pos == sorted(pos)


def test_run_report_self_contained() -> None:
    res = make_results(make_sample("standard", 80, 0.0), make_sample("deformed", 81, 0.6))
    del res.samples["standard"].histograms["map2d"]  # 2-D placeholder has no arrays
    del res.samples["deformed"].histograms["map2d"]
    text = render_run_report(res)
    chk = _check_html(text)
    body = "".join(chk.text)
    for part in ("Job summary", "Cutflow", "m_pair > 400", "Provenance", "standard toy", NOTE):
        assert part in body, part
    assert chk.tags.count("img") == 2


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        found = shutil.which(name)
        if found:
            return found
    return "/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None


def test_report_loads_in_headless_chromium(
    comparison_html: tuple[str, Path], tmp_path: Path
) -> None:
    exe = _chromium()
    if exe is None:
        pytest.skip(
            "no Chromium on this machine (looked for chromium, chromium-browser on PATH "
            "and /usr/bin/chromium); install it to run the browser check"
        )
    _, path = comparison_html
    cmd = [
        exe,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        "--enable-logging=stderr",
        f"--user-data-dir={tmp_path / 'profile'}",
        "--dump-dom",
        path.resolve().as_uri(),
    ]
    try:
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=120, check=False)
    except subprocess.TimeoutExpired:
        pytest.fail("headless Chromium did not finish within 120 s")
    assert proc.returncode == 0, proc.stderr[-2000:]
    dom = proc.stdout
    # the browser built the document: title, table and embedded images are in the DOM
    assert "<title>evtkin comparison</title>" in dom
    assert dom.count("<img") == 2
    assert "h-m-pair" in dom
    # nothing logged on the page's console: with --enable-logging=stderr Chromium prints console
    # messages as ":CONSOLE:" lines (checked by hand with a page that logs an error)
    bad = [
        ln
        for ln in proc.stderr.splitlines()
        if ":CONSOLE" in ln or "Failed to load" in ln or "ERR_FILE_NOT_FOUND" in ln
    ]
    assert bad == []
