"""The review page in a real browser: headless Chromium renders, screenshots and prints it.

Chromium (Debian package ``chromium``, at /usr/bin/chromium) runs headless with a fresh
profile and is driven through the DevTools protocol over ``--remote-debugging-pipe`` (plain
subprocess and JSON, no driver library). It loads the page from a small HTTP server on
127.0.0.1 that logs every request. The checks:

* the page made no network request but for itself: the protocol's ``Network`` events of the
  page list only the page's URL, and the server saw only that one GET (the browser's own
  background traffic is not the page's and is not in the page's events);
* every figure (inline SVG) has a non-zero rendered size and the key numbers are visible text
  (``getBoundingClientRect`` and ``innerText``, evaluated from outside: the page has no script);
* a screenshot at 1280 × 4000 is not blank and shows the critical colour;
* printed to PDF on US letter and on A4 (page sizes checked with ``pdfinfo``), no figure is
  cut across pages: each figure's title, its SVG text and its caption are on one page
  (``pdftotext``; both from Debian's ``poppler-utils``).

With CI=true a missing Chromium or poppler is a failure, not a skip.
"""

from __future__ import annotations

import base64
import html
import json
import os
import re
import select
import shutil
import subprocess
import threading
from collections.abc import Iterator
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any

import pytest
from cyclecheck.reports.page import render_page

from tests.report_documents import fixed_document, random_document

pytestmark = pytest.mark.browser

CHROMIUM = Path("/usr/bin/chromium")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-quic"]
DOCUMENTS = {"fixed": fixed_document, "random": random_document}
#: Texts that must be visible, per document (cf. tests/test_report_page.py).
VISIBLE = {
    "fixed": ["Agrees", "13.5 min", "0.07407 per min", "mix → proof → bake → cool → wrap → mix",
              "12,000", "88.9 %", "Identical sample paths.", "sign-off of a responsible engineer"],
    "random": ["Agrees", "10.62 min", "95 % interval 10.41 – 10.83 min", "0.09416 per min",
               "9.75 – 12.64 min", "40,000 firings in 5 replications", "91.0 %"],
}


def _require(path: Path, package: str) -> None:
    if path.exists():
        return
    message = f"{path} is missing: install the Debian package {package}"
    if os.environ.get("CI") == "true":
        pytest.fail(message)
    pytest.skip(message)


class _Server:
    """Serves named pages on 127.0.0.1 and logs every request it receives."""

    def __init__(self) -> None:
        self.pages: dict[str, bytes] = {}
        self.log: list[str] = []
        server = self

        class Handler(BaseHTTPRequestHandler):
            def _answer(self) -> None:
                server.log.append(f"{self.command} {self.path}")
                body = server.pages.get(self.path)
                if self.command == "GET" and body is not None:
                    self.send_response(200)
                    self.send_header("Content-Type", "text/html; charset=utf-8")
                    self.send_header("Content-Length", str(len(body)))
                    self.end_headers()
                    self.wfile.write(body)
                else:
                    self.send_error(404)

            do_GET = do_HEAD = do_POST = do_OPTIONS = _answer

            def log_message(self, format: str, *args: Any) -> None:
                pass  # the log above is the one that matters

        self.httpd = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.port = self.httpd.server_address[1]
        self.thread = threading.Thread(target=self.httpd.serve_forever, daemon=True)
        self.thread.start()

    def url(self, name: str) -> str:
        return f"http://127.0.0.1:{self.port}{name}"

    def close(self) -> None:
        self.httpd.shutdown()
        self.httpd.server_close()


class _Browser:
    """Headless Chromium driven through the DevTools protocol on a pipe.

    ``--remote-debugging-pipe`` makes Chromium read commands from fd 3 and write answers and
    events to fd 4, as JSON messages ended by a NUL byte. A shell maps our pipe ends to those
    numbers, so no code runs in the child before it starts.
    """

    def __init__(self, profile: Path) -> None:
        to_browser, self._out = os.pipe()
        self._in, from_browser = os.pipe()
        command = [str(CHROMIUM), *FLAGS, f"--user-data-dir={profile}",
                   "--remote-debugging-pipe", "about:blank"]
        self.process = subprocess.Popen(
            ["/bin/bash", "-c", f'exec "$@" 3<&{to_browser} 4>&{from_browser}', "bash", *command],
            pass_fds=(to_browser, from_browser), stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        os.close(to_browser)
        os.close(from_browser)
        self._buffer = b""
        self._next = 0
        self.events: list[dict[str, Any]] = []

    def _read(self) -> dict[str, Any]:
        while b"\0" not in self._buffer:
            # The deadline only guards against a hung browser; nothing here measures speed.
            ready, _, _ = select.select([self._in], [], [], 120)
            chunk = os.read(self._in, 1 << 20) if ready else b""
            if not chunk:
                raise RuntimeError("Chromium stopped answering")
            self._buffer += chunk
        message, self._buffer = self._buffer.split(b"\0", 1)
        return json.loads(message)

    def call(self, method: str, session: str | None = None, **params: Any) -> dict[str, Any]:
        self._next += 1
        message: dict[str, Any] = {"id": self._next, "method": method, "params": params}
        if session:
            message["sessionId"] = session
        os.write(self._out, json.dumps(message).encode() + b"\0")
        while True:
            answer = self._read()
            if answer.get("id") == self._next:
                assert "error" not in answer, (method, answer["error"])
                return answer.get("result", {})
            self.events.append(answer)

    def wait(self, event: str) -> None:
        while not any(e.get("method") == event for e in self.events):
            self.events.append(self._read())

    def close(self) -> None:
        try:
            self.call("Browser.close")
        except (RuntimeError, OSError):
            pass
        try:
            self.process.wait(timeout=60)
        except subprocess.TimeoutExpired:
            self.process.kill()
            self.process.wait()
        os.close(self._in)
        os.close(self._out)


@pytest.fixture(scope="module")
def server() -> Iterator[_Server]:
    _require(CHROMIUM, "chromium")
    s = _Server()
    yield s
    s.close()


MEASURE = """JSON.stringify({
  figures: Array.from(document.querySelectorAll("svg")).map(function (svg) {
    var box = svg.getBoundingClientRect();
    var holder = svg.closest("figure");
    return {figure: holder ? holder.id : "", width: box.width, height: box.height};
  }),
  text: document.body.innerText
})"""
#: Paper sizes in inches, as the print dialog would give them.
PAPER = {"letter": (8.5, 11.0), "a4": (210 / 25.4, 297 / 25.4)}


def open_page(browser: _Browser, url: str) -> str:
    """Load ``url`` in a new tab of 1280 x 4000 with network events on; the tab's session."""
    target = browser.call("Target.createTarget", url="about:blank")["targetId"]
    session = browser.call("Target.attachToTarget", targetId=target, flatten=True)["sessionId"]
    browser.call("Network.enable", session)
    browser.call("Page.enable", session)
    browser.call("Emulation.setDeviceMetricsOverride", session, width=1280, height=4000,
                 deviceScaleFactor=1, mobile=False)
    browser.call("Page.navigate", session, url=url)
    browser.wait("Page.loadEventFired")
    return session


def requests_of(browser: _Browser, session: str) -> list[str]:
    """Every URL the page of ``session`` asked the network for."""
    return [e["params"]["request"]["url"] for e in browser.events
            if e.get("method") == "Network.requestWillBeSent" and e.get("sessionId") == session]


@pytest.fixture(scope="module", params=sorted(DOCUMENTS))
def browsed(request: pytest.FixtureRequest, server: _Server,
            tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    """Everything the browser produced for one document."""
    name = request.param
    folder = tmp_path_factory.mktemp(f"browser-{name}")
    page = render_page(DOCUMENTS[name]())
    path = f"/{name}.html"
    server.pages[path] = page.encode("utf-8")
    start = len(server.log)
    browser = _Browser(folder / "profile")
    try:
        session = open_page(browser, server.url(path))
        # Measured from outside the page: the page itself carries no script.
        measured = browser.call("Runtime.evaluate", session, expression=MEASURE,
                                returnByValue=True)["result"]["value"]
        shot = browser.call("Page.captureScreenshot", session, format="png")["data"]
        screenshot = folder / "screenshot.png"
        screenshot.write_bytes(base64.b64decode(shot))
        pdfs = {}
        for paper, (width, height) in PAPER.items():
            data = browser.call("Page.printToPDF", session, paperWidth=width,
                                paperHeight=height, displayHeaderFooter=False,
                                printBackground=True, preferCSSPageSize=False)["data"]
            pdfs[paper] = folder / f"{paper}.pdf"
            pdfs[paper].write_bytes(base64.b64decode(data))
        requests = requests_of(browser, session)
    finally:
        browser.close()
    return {"name": name, "page": page, "url": server.url(path), "requests": requests,
            "server_log": server.log[start:], "screenshot": screenshot, **pdfs,
            "measurements": json.loads(measured)}


def test_no_network_request(browsed: dict[str, Any]) -> None:
    """The page asked the network for nothing but itself (no font, image, style or icon)."""
    assert browsed["requests"] == [browsed["url"]]
    assert browsed["server_log"] == [f"GET /{browsed['name']}.html"]


def test_every_figure_has_a_size(browsed: dict[str, Any]) -> None:
    """Each inline SVG figure is laid out with a width and a height."""
    figures = browsed["measurements"]["figures"]
    assert len(figures) == browsed["page"].count("<svg ")
    for figure in figures:
        assert figure["figure"].startswith("figure-")
        assert figure["width"] > 200 and figure["height"] > 80, figure


def test_key_numbers_are_visible(browsed: dict[str, Any]) -> None:
    """The key numbers are rendered text (innerText leaves out what is not displayed)."""
    text = re.sub(r"[\s\u00a0\u202f]+", " ", browsed["measurements"]["text"])
    for expected in VISIBLE[browsed["name"]]:
        assert expected in text


def test_screenshot_shows_the_page(browsed: dict[str, Any]) -> None:
    """The screenshot has the window's size, is not blank, and shows the critical colour."""
    import numpy as np
    from PIL import Image  # pillow comes with matplotlib

    with Image.open(browsed["screenshot"]) as image:
        assert image.size == (1280, 4000)
        pixels = np.asarray(image.convert("RGB"), dtype=np.int64)
    assert pixels.std() > 10  # not a blank page
    accent = np.array([0xB5, 0x48, 0x1C])
    near = int((np.abs(pixels - accent).sum(axis=2) < 60).sum())
    assert near > 500  # the critical circuit (thick arcs, framed boxes) is drawn


def _pdf_pages(pdf: Path) -> list[str]:
    _require(Path("/usr/bin/pdftotext"), "poppler-utils")
    out = subprocess.run(["pdftotext", "-enc", "UTF-8", str(pdf), "-"], capture_output=True,
                         text=True, check=True, timeout=120).stdout
    # Lower case: the figure numbers are set in capitals by the stylesheet.
    return [re.sub(r"\s+", " ", page).lower() for page in out.split("\f")]


def _page_size(pdf: Path) -> tuple[float, float]:
    _require(Path("/usr/bin/pdfinfo"), "poppler-utils")
    info = subprocess.run(["pdfinfo", str(pdf)], capture_output=True, text=True, check=True,
                          timeout=120).stdout
    width, height = re.search(r"Page size:\s+([\d.]+) x ([\d.]+) pts", info).groups()
    return float(width), float(height)


def _figure_marks(page: str) -> list[tuple[str, str, str]]:
    """For each figure: its title, one text of its SVG, and the start of its caption."""
    marks = []
    for number, body in enumerate(re.findall(r"<figure .*?</figure>", page, re.S), start=1):
        svg_texts = [t for t in re.findall(r"<text[^>]*>([^<]{3,})</text>", body)
                     if re.search(r"[a-z]{3}", t)]
        caption = re.sub(r"<[^>]+>", "", re.search(r"<figcaption>(.*?)</figcaption>", body,
                                                   re.S).group(1))
        words = html.unescape(caption).split()
        marks.append((f"figure {number}", html.unescape(svg_texts[-1]).lower(),
                      " ".join(words[:4]).lower()))
    return marks


@pytest.mark.parametrize(("paper", "size"), [("letter", (612, 792)), ("a4", (595, 842))])
def test_printed_figures_are_not_cut(browsed: dict[str, Any], paper: str,
                                     size: tuple[int, int]) -> None:
    """On letter and on A4, each figure (title, drawing, caption) sits on a single page."""
    pdf = browsed[paper]
    width, height = _page_size(pdf)
    assert abs(width - size[0]) < 1.5 and abs(height - size[1]) < 1.5
    pages = _pdf_pages(pdf)
    assert len(pages) > 1
    for title, svg_text, caption in _figure_marks(browsed["page"]):
        holders = [i for i, text in enumerate(pages) if title in text]
        assert len(holders) == 1, (title, holders)
        page = pages[holders[0]]
        assert svg_text in page, (title, svg_text)
        assert caption in page, (title, caption)


TABLES = """JSON.stringify(Array.from(document.querySelectorAll(".table-wrap")).map(function (w) {
  var table = w.querySelector("table");
  return {caption: table.caption ? table.caption.innerText : "", wrap: w.clientWidth,
          scroll: w.scrollWidth, table: table.getBoundingClientRect().width,
          right: table.getBoundingClientRect().right,
          page: document.documentElement.clientWidth};
}))"""
#: Width of the text block on A4 paper in CSS pixels: 210 mm less the 13 mm margins of
#: style.css on each side, at 96 px per inch (US letter is wider).
A4_TEXT_PX = (210 - 2 * 13) / 25.4 * 96


def test_wide_tables_fit_on_screen_and_on_paper(server: _Server, tmp_path: Path) -> None:
    """The widest tables (every optional column, long labels and durations) fit a 1200 px
    window without a sideways scroll, and fit the A4 text block when printed; in the PDF every
    header of the transitions table is there."""
    from tests.report_documents import wide_document

    page = render_page(wide_document())
    server.pages["/wide.html"] = page.encode("utf-8")
    browser = _Browser(tmp_path / "profile")
    try:
        target = browser.call("Target.createTarget", url="about:blank")["targetId"]
        session = browser.call("Target.attachToTarget", targetId=target,
                               flatten=True)["sessionId"]
        browser.call("Page.enable", session)
        browser.call("Emulation.setDeviceMetricsOverride", session, width=1200, height=2000,
                     deviceScaleFactor=1, mobile=False)
        browser.call("Page.navigate", session, url=server.url("/wide.html"))
        browser.wait("Page.loadEventFired")
        screen = json.loads(browser.call("Runtime.evaluate", session, expression=TABLES,
                                         returnByValue=True)["result"]["value"])
        browser.call("Emulation.setEmulatedMedia", session, media="print")
        browser.call("Emulation.setDeviceMetricsOverride", session,
                     width=int(A4_TEXT_PX), height=2000, deviceScaleFactor=1, mobile=False)
        paper = json.loads(browser.call("Runtime.evaluate", session, expression=TABLES,
                                        returnByValue=True)["result"]["value"])
        data = browser.call("Page.printToPDF", session, paperWidth=PAPER["a4"][0],
                            paperHeight=PAPER["a4"][1], printBackground=True,
                            preferCSSPageSize=False)["data"]
    finally:
        browser.close()
    captions = [t["caption"] for t in screen]
    assert any(c.startswith("Transitions") for c in captions)
    for table in screen:
        assert table["scroll"] <= table["wrap"], table  # no sideways scroll at 1200 px
    for table in paper:
        assert table["table"] <= table["wrap"] + 0.5, table
        assert table["right"] <= table["page"] + 0.5, table
    pdf = tmp_path / "wide.pdf"
    pdf.write_bytes(base64.b64decode(data))
    text = " ".join(_pdf_pages(pdf))
    for header in ("transition", "label", "duration", "mean", "slack", "criticality",
                   "periodic", "start", "cycle time"):
        assert header in text, header


def test_chromium_is_required_on_ci(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    """Under CI=true a missing browser fails the run instead of skipping it."""
    monkeypatch.setenv("CI", "true")
    with pytest.raises(pytest.fail.Exception, match="install the Debian package chromium"):
        _require(tmp_path / "no-chromium", "chromium")
    monkeypatch.setenv("CI", "false")
    with pytest.raises(pytest.skip.Exception):
        _require(tmp_path / "no-chromium", "chromium")


def test_tools_are_where_ci_installs_them() -> None:
    """The Debian paths used above are the ones the packages install (chromium, poppler)."""
    _require(CHROMIUM, "chromium")
    _require(Path("/usr/bin/pdftotext"), "poppler-utils")
    assert shutil.which("pdfinfo") == "/usr/bin/pdfinfo"


TEXT_BOXES = """JSON.stringify(Array.from(document.querySelectorAll("figure")).map(function (f) {
  return {figure: f.id, texts: Array.from(f.querySelectorAll("svg text")).map(function (t) {
    var r = t.getBoundingClientRect();
    return {text: t.textContent, left: r.left, top: r.top, right: r.right, bottom: r.bottom};
  })};
}))"""


def _overlapping(texts: list[dict[str, Any]]) -> list[tuple[str, str]]:
    """Pairs of texts whose rendered boxes share an area (touching edges do not count)."""
    pairs = []
    for i, a in enumerate(texts):
        for b in texts[i + 1:]:
            if (min(a["right"], b["right"]) - max(a["left"], b["left"]) > 0.01
                    and min(a["bottom"], b["bottom"]) - max(a["top"], b["top"]) > 0.01):
                pairs.append((a["text"], b["text"]))
    return pairs


@pytest.mark.parametrize("name", ["line60", "line30", "loop5", "fixed", "random"])
def test_graph_labels_do_not_overlap_in_the_browser(server: _Server, tmp_path: Path,
                                                    name: str) -> None:
    """In the event graph as Chromium renders it (the page's own fonts), no two text
    elements overlap: transition ids, slack or criticality labels, token counts, tags and the
    legend, measured with getBoundingClientRect. Cases: a line of 60 stations and 178 places
    (folded into bands, every place labelled with its slack), a line of 30, the five-station
    loop with criticality percentages beside places holding tokens, and the two samples."""
    from tests.report_documents import line_document, loop_document

    make = {"line60": lambda: line_document(60), "line30": lambda: line_document(30),
            "loop5": loop_document, **DOCUMENTS}[name]
    page = render_page(make())
    server.pages[f"/graph-{name}.html"] = page.encode("utf-8")
    browser = _Browser(tmp_path / "profile")
    try:
        session = open_page(browser, server.url(f"/graph-{name}.html"))
        figures = json.loads(browser.call("Runtime.evaluate", session, expression=TEXT_BOXES,
                                          returnByValue=True)["result"]["value"])
    finally:
        browser.close()
    graph = next(f for f in figures if f["figure"] == "figure-graph")
    texts = [t for t in graph["texts"] if t["text"].strip()]
    model = make()["model"]
    # Every transition id is drawn, and the labels are there (not all dropped to pass).
    assert len(texts) >= len(model["transitions"]) + len(model["places"]) // 2, len(texts)
    assert _overlapping(texts) == []
    for figure in figures:
        if figure["figure"] == "figure-components":
            assert _overlapping(figure["texts"]) == []
