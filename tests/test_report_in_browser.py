"""The demo report opens in a real browser (headless Chromium): every section and every embedded figure is
rendered, nothing is requested from the network and the console stays free of errors; a screenshot is
saved. Skipped with a reason when Chromium is not installed, except under AIRHEALTH_REQUIRE_BROWSER=1
(set by .ci/run), where a missing browser fails. Plus a plain check, without a browser, that the page
references no http(s) resource."""

from __future__ import annotations

import base64
import os
import re
import struct
from html.parser import HTMLParser
from pathlib import Path

import pytest
from chromium_page import find_chromium, visit_page

_PAGE_FACTS = """(() => {
  const images = [...document.images];
  return {
    sections: [...document.querySelectorAll('main > section > h2')].map(h => h.textContent),
    toc: [...document.querySelectorAll('nav.toc a')].map(a => a.getAttribute('href')),
    anchors: [...document.querySelectorAll('main > section')].map(s => '#' + s.id),
    images: images.length,
    drawn: images.filter(i => i.complete && i.naturalWidth > 0 && i.getBoundingClientRect().width > 200).length,
    cautions: document.querySelectorAll('.caution').length,
    caution_text: [...document.querySelectorAll('.caution')].map(c => c.textContent).join(' '),
    wider_than_window: document.documentElement.scrollWidth > window.innerWidth,
  };
})()"""


@pytest.fixture(scope="module")
def chromium() -> str:
    path = find_chromium()
    if path is None:
        reason = "chromium is not installed (apt-get install -y chromium)"
        if os.environ.get("AIRHEALTH_REQUIRE_BROWSER") == "1":
            pytest.fail(f"{reason}; AIRHEALTH_REQUIRE_BROWSER=1: CI must run the browser test")
        pytest.skip(reason)
    return path


class _Headings(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.h2: list[str] = []
        self._in_h2 = False

    def handle_starttag(self, tag: str, attrs: list) -> None:
        self._in_h2 = tag == "h2"

    def handle_endtag(self, tag: str) -> None:
        self._in_h2 = False

    def handle_data(self, data: str) -> None:
        if self._in_h2:
            self.h2.append(data)


def _png_size(path: Path) -> tuple[int, int]:
    header = path.read_bytes()[:24]
    assert header[:8] == b"\x89PNG\r\n\x1a\n", "the screenshot is not a PNG"
    return struct.unpack(">II", header[16:24])


def test_the_demo_report_renders_offline_in_chromium(chromium: str, demo_report: Path, tmp_path: Path) -> None:
    page = demo_report / "index.html"
    visit = visit_page(page, _PAGE_FACTS, tmp_path / "demo-report.png")
    facts = visit.facts
    parser = _Headings()
    parser.feed(page.read_text(encoding="utf-8"))
    assert facts["sections"] == parser.h2, "every section of the page is rendered, in order"
    assert {"Analyses", "Effect estimates", "Main model", "Hourly monitoring data: coverage and completeness"} <= set(
        facts["sections"]
    )
    further = [
        "Diagnostics of the main model",
        "Sensitivity analyses",
        "Adjustment for co-pollutants",
        "Time series and case-crossover",
        "Attributable burden",
    ]  # the demo's further analyses of its main model, in the demo's order
    assert [s for s in facts["sections"] if s in further] == further
    assert facts["toc"] == facts["anchors"], "the table of contents links every section"
    figures = len(list((demo_report / "figures").glob("*.png")))
    assert facts["images"] == figures >= 10
    assert facts["drawn"] == facts["images"], "every embedded figure decoded and laid out"
    assert facts["cautions"] == 2, "the caution at the top and the bottom"
    assert facts["caution_text"].count("assumes that the estimated association is causal") == 2, "burden caution"
    assert not facts["wider_than_window"], "nothing sticks out of a 1200-pixel window"
    assert visit.network_requests == []
    assert visit.console_errors == []
    assert visit.requests and visit.requests[0] == page.resolve().as_uri()  # the recorder did see the page load
    width, height = _png_size(visit.screenshot)
    assert width == 600 and height > 2000, (width, height)  # the whole page at half scale


def test_the_browser_check_sees_requests_and_console_errors(chromium: str, tmp_path: Path) -> None:
    """Guard for the test above: a page with an external image and a console error is caught."""
    page = tmp_path / "bad.html"
    page.write_text(
        "<!DOCTYPE html><html><body><h2>x</h2><img src='http://127.0.0.1:9/x.png'>"
        "<script>console.error('boom')</script></body></html>"
    )
    visit = visit_page(page, "({n: document.images.length})", tmp_path / "bad.png")
    assert visit.facts == {"n": 1}
    assert visit.network_requests == ["http://127.0.0.1:9/x.png"]
    assert "boom" in visit.console_errors


_RESOURCE = re.compile(
    r"""(?:\b(?:src|href|xlink:href|action|poster|data)\s*=\s*["']?\s*|url\(\s*["']?\s*|@import\s+["']?)"""
    r"""(?:https?:)?//""",
    re.IGNORECASE,
)


def _embedded_svgs(page: str) -> list[str]:
    found = re.findall(r"data:image/svg\+xml;base64,([A-Za-z0-9+/=]+)", page)
    return [base64.b64decode(b).decode("utf-8") for b in found]


def test_the_report_page_references_no_web_resource(demo_report: Path) -> None:
    page = (demo_report / "index.html").read_text(encoding="utf-8")
    assert _RESOURCE.search("<img src='https://cdn.example/x.png'>")  # the pattern does catch references
    assert _RESOURCE.search("a{background:url(//fonts.example/f.woff)}")
    assert _RESOURCE.findall(page) == []
    assert "<script" not in page.lower() and "<link" not in page.lower()
    svgs = _embedded_svgs(page)
    assert len(svgs) == len(list((demo_report / "figures").glob("*.svg")))
    for svg in svgs:  # inside the figures too (their namespace URIs name, and never fetch, anything)
        assert _RESOURCE.findall(svg) == []
