#!/usr/bin/env python3
"""Checks a results folder's report.html in a real browser (headless Chromium).

Usage: tests/browser/check_report.py RESULTS_FOLDER

A folder written by `sextant apply` (its manifest names a model and no recipe)
gets the checks of a batch report instead (see check_batch): the file loads
nothing, the browser builds the control chart with a T² and an SPE limit line
per confidence level, the score plot, the flagged rows and the provenance with
the model's and the batch's SHA-256, makes no request and logs nothing, and a
screenshot of the chart alone shows its coloured points.

With networking cut off (every request goes to a closed local proxy port), it
opens report.html from the file system and checks:

  1. the file itself: no <link>, no <script src>, no src/href to http(s);
  2. the page as the browser built it (--dump-dom, scripts on): the title, the
     summary sentences, the variance table (one row per line of variance.csv),
     the loadings, the flagged rows, one <svg> per figure in plots/, the
     cautions, the provenance with the input's SHA-256 from manifest.json, and,
     when the page has the 3-D view, that its script ran: the canvas is shown,
     marked data-ready="yes" and drew every point;
  3. no request left the page (Chromium's network log) and the page printed
     nothing to the console (no script error, no blocked load);
  4. without scripts (the file as parsed) everything but the 3-D view is
     there, the view stays hidden and the page says a script is needed for it;
  5. dragging the 3-D view (synthetic pointer events) and an arrow key turn
     it, and a double-click resets it;
  6. a screenshot (1280 x 2000) of the top of the page is not blank, and one
     of the 3-D view alone shows coloured points that a copy of the page
     without its script does not.

It needs Python 3 (standard library only) and Chromium (Debian package
chromium; set CHROMIUM to use another binary). Exits 0 when every check
passes, else 1 with a message naming the failed check; 2 for bad usage.
"""

import html.parser
import json
import os
import pathlib
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import zlib

TIMEOUT = 120
WINDOW = (1280, 2000)
PALETTE = ["#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7", "#000000"]


class CheckFailed(Exception):
    pass


def fail(message):
    raise CheckFailed(message)


def ok(message):
    print(f"  ok  {message}")


# ------------------------------------------------------------------ browser


def find_chromium():
    for name in [os.environ.get("CHROMIUM"), "chromium", "chromium-browser"]:
        if name and shutil.which(name):
            return shutil.which(name)
    fail("Chromium was not found: install the Debian package chromium "
         "(apt-get install -y chromium) or set CHROMIUM to the browser binary")


def run_chromium(chromium, url, extra, workdir):
    """Runs headless Chromium once with networking cut off; returns
    (stdout, stderr, net log path)."""
    profile = tempfile.mkdtemp(prefix="profile-", dir=workdir)
    netlog = os.path.join(workdir, f"netlog-{len(os.listdir(workdir))}.json")
    args = [
        chromium,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--no-default-browser-check",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--disable-extensions",
        "--hide-scrollbars",
        "--mute-audio",
        f"--user-data-dir={profile}",
        # Every request goes to a closed port on this machine, so none can succeed.
        "--proxy-server=127.0.0.1:9",
        "--proxy-bypass-list=<-loopback>",
        "--host-resolver-rules=MAP * ~NOTFOUND",
        f"--log-net-log={netlog}",
        "--enable-logging=stderr",
        "--v=0",
        f"--window-size={WINDOW[0]},{WINDOW[1]}",
        "--virtual-time-budget=5000",
        *extra,
        url,
    ]
    try:
        done = subprocess.run(args, capture_output=True, timeout=TIMEOUT, cwd=workdir)
    except subprocess.TimeoutExpired:
        fail(f"Chromium did not finish within {TIMEOUT} s ({' '.join(extra)})")
    stdout = done.stdout.decode("utf-8", "replace")
    stderr = done.stderr.decode("utf-8", "replace")
    if done.returncode != 0:
        fail(f"Chromium exited with {done.returncode} ({' '.join(extra)}):\n{stderr[-2000:]}")
    return stdout, stderr, netlog


def page_requests(netlog_path):
    """URLs the page itself asked for (the browser's own background requests,
    made with no page as initiator, are left out)."""
    if not os.path.exists(netlog_path):
        fail("Chromium wrote no network log, so requests cannot be checked")
    text = pathlib.Path(netlog_path).read_text("utf-8", "replace").rstrip()
    if not text.endswith("}"):
        # A log cut short ends in "...,"; close it.
        text = text.rstrip(",\n") + "]}"
    try:
        log = json.loads(text)
    except json.JSONDecodeError as e:
        fail(f"the network log is not JSON: {e}")
    types = {v: k for k, v in log["constants"]["logEventTypes"].items()}
    urls = []
    for event in log.get("events", []):
        params = event.get("params") or {}
        if types.get(event.get("type")) == "URL_REQUEST_START_JOB" and "url" in params:
            if params.get("initiator") != "not an origin":
                urls.append(params["url"])
    return urls


def console_messages(stderr, page_url):
    """Console lines Chromium logged for the page."""
    return [line for line in stderr.splitlines()
            if ":CONSOLE" in line and page_url in line]


# ------------------------------------------------------------------ DOM


VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link",
        "meta", "source", "track", "wbr"}


class Node:
    def __init__(self, tag, attrs, parent):
        self.tag, self.attrs, self.parent = tag, dict(attrs), parent
        self.children = []

    def text(self):
        return "".join(c if isinstance(c, str) else c.text() for c in self.children)

    def walk(self):
        for c in self.children:
            if isinstance(c, Node):
                yield c
                yield from c.walk()

    def all(self, tag=None, cls=None):
        for n in self.walk():
            if (tag is None or n.tag == tag) and (cls is None or cls in n.attrs.get("class", "").split()):
                yield n

    def by_id(self, ident):
        return next((n for n in self.walk() if n.attrs.get("id") == ident), None)


class Builder(html.parser.HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.root = Node("#document", [], None)
        self.at = self.root

    def handle_starttag(self, tag, attrs):
        node = Node(tag, attrs, self.at)
        self.at.children.append(node)
        if tag not in VOID:
            self.at = node

    def handle_startendtag(self, tag, attrs):
        self.at.children.append(Node(tag, attrs, self.at))

    def handle_endtag(self, tag):
        n = self.at
        while n is not None and n.tag != tag:
            n = n.parent
        if n is not None and n.parent is not None:
            self.at = n.parent

    def handle_data(self, data):
        self.at.children.append(data)


def parse(markup):
    b = Builder()
    b.feed(markup)
    b.close()
    return b.root


def squeeze(text):
    return " ".join(text.split())


# ------------------------------------------------------------------ PNG


def png_pixels(path):
    """Decodes an 8-bit RGB or RGBA PNG; returns (width, height, channels, rows)."""
    data = pathlib.Path(path).read_bytes()
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        fail(f"{path} is not a PNG file")
    pos, idat, header = 8, [], None
    while pos < len(data):
        (length,) = struct.unpack(">I", data[pos:pos + 4])
        kind, body = data[pos + 4:pos + 8], data[pos + 8:pos + 8 + length]
        pos += 12 + length
        if kind == b"IHDR":
            header = struct.unpack(">IIBBBBB", body)
        elif kind == b"IDAT":
            idat.append(body)
        elif kind == b"IEND":
            break
    width, height, depth, colour, _, _, interlace = header
    if depth != 8 or colour not in (2, 6) or interlace:
        fail(f"{path}: unexpected PNG format (depth {depth}, colour type {colour})")
    bpp = 3 if colour == 2 else 4
    raw = zlib.decompress(b"".join(idat))
    stride = width * bpp
    rows, previous, i = [], bytearray(stride), 0
    for _ in range(height):
        kind = raw[i]
        line = bytearray(raw[i + 1:i + 1 + stride])
        i += 1 + stride
        if kind == 1:
            for x in range(bpp, stride):
                line[x] = (line[x] + line[x - bpp]) & 255
        elif kind == 2:
            line = bytearray((a + b) & 255 for a, b in zip(line, previous))
        elif kind == 3:
            for x in range(stride):
                left = line[x - bpp] if x >= bpp else 0
                line[x] = (line[x] + ((left + previous[x]) >> 1)) & 255
        elif kind == 4:
            for x in range(stride):
                a = line[x - bpp] if x >= bpp else 0
                b = previous[x]
                c = previous[x - bpp] if x >= bpp else 0
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                line[x] = (line[x] + (a if pa <= pb and pa <= pc else b if pb <= pc else c)) & 255
        rows.append(bytes(line))
        previous = line
    return width, height, bpp, rows


def picture_stats(path):
    """(share of pixels that are not near-white, distinct colours, pixels of
    saturated colour), sampled on every second pixel of every second row."""
    width, height, bpp, rows = png_pixels(path)
    colours, inked, saturated, total = set(), 0, 0, 0
    for y in range(0, height, 2):
        row = rows[y]
        for x in range(0, width, 2):
            r, g, b = row[x * bpp], row[x * bpp + 1], row[x * bpp + 2]
            colours.add((r, g, b))
            total += 1
            if min(r, g, b) < 235:
                inked += 1
            if max(r, g, b) - min(r, g, b) > 70:
                saturated += 1
    return inked / max(total, 1), len(colours), saturated


# ------------------------------------------------------------------ checks


def check_file(markup):
    lower = markup.lower()
    if "<link" in lower:
        fail("the file has a <link> element")
    for m in re.finditer(r"<script\b[^>]*>", lower):
        if re.search(r"\ssrc\s*=", m.group(0)):
            fail(f"the file loads a script: {m.group(0)}")
    for m in re.finditer(r"\s(src|href|xlink:href)\s*=\s*([\"']?)\s*(https?:|//)", lower):
        fail(f"the file has {m.group(1)}= pointing outside: {markup[m.start():m.start() + 80]}")
    if re.search(r"url\(\s*[\"']?\s*(https?:|//)", lower) or "@import" in lower:
        fail("the style sheet loads something")
    ok("the file has no <link>, no <script src> and no src/href to http(s)")


def check_dom(dom, expected, scripts_on):
    where = "with scripts" if scripts_on else "without scripts (the file as parsed)"
    root = parse(dom)
    h1 = next(root.all("h1"), None)
    if h1 is None or squeeze(h1.text()) != squeeze(expected["title"]):
        fail(f"{where}: the heading is {h1.text() if h1 else None!r}, not {expected['title']!r}")

    summary = root.by_id("summary")
    sentences = [squeeze(li.text()) for li in summary.all("li")] if summary else []
    if not sentences or sentences != expected["summary"]:
        fail(f"{where}: the summary shows {sentences!r}, expected {expected['summary']!r}")

    table = next(root.all("table", "sx-variance"), None)
    rows = list(table.all("tr")) if table else []
    if len(rows) - 1 != expected["components"]:
        fail(f"{where}: the variance table has {len(rows) - 1} rows, variance.csv has {expected['components']}")
    kept = len([r for r in rows if "sx-kept" in r.attrs.get("class", "").split()])
    if kept != expected["kept"]:
        fail(f"{where}: {kept} kept rows in the variance table, variance.csv keeps {expected['kept']}")

    cards = list(root.all("div", "sx-card"))
    if len(cards) != expected["kept"]:
        fail(f"{where}: {len(cards)} loading tables for {expected['kept']} kept components")

    flagged = root.by_id("flagged")
    shown = len(list(next(flagged.all("tbody")).all("tr"))) if flagged and expected["flagged"] else 0
    if shown != min(expected["flagged"], 100):
        fail(f"{where}: {shown} flagged rows shown, the manifest has {expected['flagged']}")

    svgs = len(list(root.all("svg")))
    figures = len(list(root.all("figure")))
    if figures != expected["figures"] or svgs < expected["figures"]:
        fail(f"{where}: {figures} figures and {svgs} <svg> elements for {expected['figures']} files in plots/")
    for figure in root.all("figure"):
        if next(figure.all("svg"), None) is None:
            fail(f"{where}: a figure has no <svg>: {squeeze(figure.text())[:120]}")

    cautions = root.by_id("cautions")
    if cautions is None or len(list(cautions.all("li"))) < 1:
        fail(f"{where}: no cautions")

    provenance = root.by_id("provenance")
    if provenance is None or expected["input_sha256"] not in provenance.text():
        fail(f"{where}: the provenance does not show the input's SHA-256 {expected['input_sha256']}")

    canvas = root.by_id("sx3d-canvas")
    box = root.by_id("sx3d-box")
    data = root.by_id("sx3d-data")
    three_d = ""
    if expected["points"] is not None:
        if canvas is None or box is None or data is None:
            fail(f"{where}: the 3-D view is missing")
        if scripts_on:
            if canvas.attrs.get("data-ready") != "yes":
                fail("the 3-D view's script did not draw (no data-ready=\"yes\" on the canvas)")
            if canvas.attrs.get("data-drawn") != str(expected["points"]):
                fail(f"the 3-D view drew {canvas.attrs.get('data-drawn')} of {expected['points']} points")
            if "hidden" in box.attrs:
                fail("the 3-D view is still hidden after its script ran")
            three_d = f", the 3-D view drawn with {expected['points']} points"
        else:
            if "data-ready" in canvas.attrs:
                fail("without scripts the canvas claims to be drawn")
            if "hidden" not in box.attrs:
                fail("without scripts the empty 3-D view is shown")
            notes = [squeeze(n.text()) for n in root.all("noscript")]
            if not any("needs JavaScript" in n for n in notes):
                fail("without scripts the page does not say the 3-D view needs a script")
            three_d = ", and the note that the 3-D view needs a script"
    ok(f"{where}: title, {len(sentences)} summary sentences, {len(rows) - 1} variance rows, "
       f"{len(cards)} loading tables, {shown} flagged rows, {figures} figures with {svgs} <svg>, "
       f"cautions, provenance with the input's SHA-256{three_d}")


def check_quiet(stderr, netlog, url, what):
    requests = page_requests(netlog)
    if requests:
        fail(f"{what}: the page made network requests: {requests[:5]}")
    messages = console_messages(stderr, url)
    if messages:
        fail(f"{what}: the page wrote to the console (script error or blocked load?):\n" + "\n".join(messages[:5]))
    ok(f"{what}: no network request from the page, nothing on the console")


def check_screenshot(path, what, blank_ok=False):
    if not os.path.exists(path) or os.path.getsize(path) == 0:
        fail(f"{what}: Chromium wrote no screenshot")
    inked, colours, saturated = picture_stats(path)
    if not blank_ok and (inked < 0.01 or colours < 16):
        fail(f"{what}: the screenshot looks blank ({inked:.1%} non-white pixels, {colours} colours)")
    ok(f"{what}: screenshot not blank ({inked:.1%} non-white pixels, {colours} colours, "
       f"{saturated} sampled pixels of saturated colour)")
    return saturated


ROTATION_TEST = """<script>
(function () {
  var c = document.getElementById("sx3d-canvas");
  var result = [];
  function shot() { return c.toDataURL(); }
  function pointer(type, x, y) {
    var r = c.getBoundingClientRect();
    c.dispatchEvent(new PointerEvent(type, {bubbles: true, cancelable: true, pointerId: 7,
      pointerType: "mouse", isPrimary: true, button: 0, buttons: type === "pointerup" ? 0 : 1,
      clientX: r.left + x, clientY: r.top + y}));
  }
  function after(check, next) {
    setTimeout(function () { check(); next(); }, 200);
  }
  var start = shot();
  pointer("pointerdown", 200, 150);
  pointer("pointermove", 260, 170);
  pointer("pointermove", 320, 190);
  pointer("pointerup", 320, 190);
  after(function () { result.push(shot() !== start ? "drag-rotates" : "drag-does-nothing"); }, function () {
    var dragged = shot();
    c.dispatchEvent(new KeyboardEvent("keydown", {key: "ArrowUp", bubbles: true, cancelable: true}));
    after(function () { result.push(shot() !== dragged ? "keys-rotate" : "keys-do-nothing"); }, function () {
      c.dispatchEvent(new MouseEvent("dblclick", {bubbles: true}));
      after(function () { result.push(shot() === start ? "reset-works" : "reset-differs"); }, function () {
        document.body.setAttribute("data-rotation-test", result.join(" "));
      });
    });
  });
})();
</script>"""


FRAMES_AS_TIMERS = """<script>
window.requestAnimationFrame = function (f) { return setTimeout(function () { f(Date.now()); }, 16); };
</script>"""


def check_rotation(chromium, markup, work):
    """Drags the 3-D view with synthetic pointer events, presses an arrow key,
    then double-clicks, in a copy of the page with a test script added (and the
    page's script policy removed so the test script may run)."""
    page = re.sub(r'<meta http-equiv="Content-Security-Policy"[^>]*>\n?', "", markup, count=1)
    page = page.replace("</body>", ROTATION_TEST + "\n</body>", 1)
    # Headless Chromium under virtual time runs animation frames unreliably;
    # timers are reliable, so frames become 16 ms timers in this copy.
    page = page.replace("</title>", "</title>\n" + FRAMES_AS_TIMERS, 1)
    copy = pathlib.Path(work) / "rotation-test.html"
    copy.write_text(page, "utf-8")
    dom, err, netlog = run_chromium(chromium, copy.as_uri(), ["--dump-dom"], work)
    check_quiet(err, netlog, copy.as_uri(), "rotation test")
    body = next(parse(dom).all("body"), None)
    outcome = body.attrs.get("data-rotation-test") if body is not None else None
    if outcome != "drag-rotates keys-rotate reset-works":
        fail(f"the 3-D view does not rotate as it should: {outcome!r} "
             "(expected 'drag-rotates keys-rotate reset-works')")
    ok("the 3-D view turns when dragged and with the arrow keys, and a double-click resets it")


def expectations(folder, markup):
    manifest = json.loads((folder / "manifest.json").read_text("utf-8"))
    outputs = {o["path"]: o for o in manifest["outputs"]}
    if "report.html" not in outputs:
        fail("manifest.json does not list report.html")
    variance = (folder / "variance.csv").read_text("utf-8").splitlines()
    header = variance[0].split(",")
    kept_column = header.index("kept") if "kept" in header else None
    kept = sum(1 for line in variance[1:] if kept_column is not None
               and line.split(",")[kept_column].strip().lower() in ("true", "yes", "1"))
    static = parse(markup)
    title = next(static.all("title")).text()
    summary = static.by_id("summary")
    data = static.by_id("sx3d-data")
    points = len(json.loads(data.text())["points"]) if data is not None else None
    if points is None and len(variance) - 1 >= 3:
        fail("the report has no 3-D view although three or more components were computed")
    return {
        "title": title,
        "summary": [squeeze(li.text()) for li in summary.all("li")] if summary else [],
        "components": len(variance) - 1,
        "kept": kept,
        "flagged": manifest["steps"]["diagnostics"]["flagged_rows"],
        "figures": sum(1 for p in outputs if p.startswith("plots/") and p.endswith(".svg")),
        "input_sha256": manifest["inputs"][0]["sha256"],
        "points": points,
    }


def check_batch_dom(dom, manifest, where):
    root = parse(dom)
    h1 = next(root.all("h1"), None)
    table = manifest["inputs"][0]["path"].rsplit("/", 1)[-1]
    if h1 is None or table not in h1.text():
        fail(f"{where}: the heading {h1.text() if h1 else None!r} does not name the batch {table!r}")
    control = root.by_id("control")
    svg = next(control.all("svg"), None) if control is not None else None
    if svg is None:
        fail(f"{where}: the control chart has no <svg>")
    levels = manifest["steps"]["limits"]
    for series, limit, key in [("control-t2", "t2-limit", "t2"), ("control-spe", "spe-limit", "spe")]:
        g = next(svg.all("g", series), None)
        if g is None:
            fail(f"{where}: the control chart has no {series} group")
        lines = [n.attrs.get("data-confidence") for n in g.all("line", limit)]
        expected = [str(l["confidence"]) for l in levels if l.get(key) is not None]
        if lines != expected:
            fail(f"{where}: {series} has limit lines at {lines}, the manifest has {expected}")
        if next(g.all("polyline", "series"), None) is None:
            fail(f"{where}: {series} has no line through the rows")
    scores = root.by_id("scores")
    if scores is None or next(scores.all("svg"), None) is None:
        fail(f"{where}: the score plot is missing")
    if root.by_id("flagged") is None or root.by_id("fills") is None:
        fail(f"{where}: the flagged rows or the filled cells are missing")
    provenance = root.by_id("provenance")
    for what, sha in [("model", manifest["model"]["sha256"]), ("batch", manifest["inputs"][0]["sha256"])]:
        if provenance is None or sha not in provenance.text():
            fail(f"{where}: the provenance does not show the {what}'s SHA-256 {sha}")
    ok(f"{where}: heading, control chart with {len(levels)} levels of T² and SPE limits, "
       "score plot, flagged rows, fills, provenance with both SHA-256")


def check_batch(folder, markup, chromium):
    """The report of a scored batch (an apply folder): it has no script."""
    manifest = json.loads((folder / "manifest.json").read_text("utf-8"))
    if "report.html" not in {o["path"] for o in manifest["outputs"]}:
        fail("manifest.json does not list report.html")
    check_file(markup)
    if "<script" in markup.lower():
        fail("the batch report has a script")
    url = (folder / "report.html").as_uri()
    with tempfile.TemporaryDirectory(prefix="sextant-browser-") as work:
        dom, err, netlog = run_chromium(chromium, url, ["--dump-dom"], work)
        check_batch_dom(dom, manifest, "as the browser built it")
        check_quiet(err, netlog, url, "batch report")
        top = os.path.join(work, "top.png")
        _, err, netlog = run_chromium(chromium, url, [f"--screenshot={top}"], work)
        check_quiet(err, netlog, url, "screenshot")
        check_screenshot(top, "top of the batch report")
        alone = pathlib.Path(work) / "chart-alone.html"
        alone.write_text(markup.replace(
            "</head>", "<style>main > :not(#control){display:none!important}</style>\n</head>", 1), "utf-8")
        shot = os.path.join(work, "chart.png")
        _, err, netlog = run_chromium(chromium, alone.as_uri(), [f"--screenshot={shot}"], work)
        check_quiet(err, netlog, alone.as_uri(), "screenshot of the control chart")
        saturated = check_screenshot(shot, "the control chart alone")
        if saturated < 40:
            fail(f"the control chart shows only {saturated} sampled pixels of saturated colour; its points are not drawn")
        ok(f"the control chart's points are drawn ({saturated} sampled pixels of saturated colour)")


def main(argv):
    if len(argv) != 2 or argv[1] in ("-h", "--help"):
        print(__doc__.strip(), file=sys.stderr)
        return 2
    folder = pathlib.Path(argv[1]).resolve()
    report = folder / "report.html"
    print(f"checking {report}")
    try:
        if not report.is_file():
            fail(f"{report} does not exist (run the recipe first)")
        markup = report.read_text("utf-8")
        chromium = find_chromium()
        written = json.loads((folder / "manifest.json").read_text("utf-8"))
        if "model" in written and "recipe" not in written:
            check_batch(folder, markup, chromium)
            print("report.html of the batch passed every browser check")
            return 0
        expected = expectations(folder, markup)
        check_file(markup)
        url = report.as_uri()
        with tempfile.TemporaryDirectory(prefix="sextant-browser-") as work:
            dom, err, netlog = run_chromium(chromium, url, ["--dump-dom"], work)
            check_dom(dom, expected, scripts_on=True)
            check_quiet(err, netlog, url, "with scripts")

            if expected["points"] is not None:
                check_rotation(chromium, markup, work)

            # Without scripts the DOM is the parsed file (--dump-dom itself needs
            # scripts), so check the file's own markup, then look at the page.
            check_dom(markup, expected, scripts_on=False)

            top = os.path.join(work, "top.png")
            _, err, netlog = run_chromium(chromium, url, [f"--screenshot={top}"], work)
            check_quiet(err, netlog, url, "screenshot")
            check_screenshot(top, "top of the page")

            if expected["points"] is not None:
                # The 3-D view alone: a copy of the page with an added rule that
                # hides every other part (the page's own script runs unchanged).
                alone = pathlib.Path(work) / "view-alone.html"
                alone.write_text(markup.replace(
                    "</head>",
                    "<style>main > :not(#scores-3d){display:none!important}</style>\n</head>", 1), "utf-8")
                alone_url = alone.as_uri()
                view = os.path.join(work, "view.png")
                _, err, netlog = run_chromium(chromium, alone_url, [f"--screenshot={view}"], work)
                check_quiet(err, netlog, alone_url, "screenshot of the 3-D view")
                on = check_screenshot(view, "3-D view with scripts")
                # The same without the page's code (headless Chromium takes no
                # screenshot with scripting switched off): the view stays hidden.
                bare = pathlib.Path(work) / "view-alone-without-code.html"
                bare.write_text(re.sub(r"<script>.*?</script>", "", alone.read_text("utf-8"), flags=re.S), "utf-8")
                still = os.path.join(work, "view-without-code.png")
                _, err, netlog = run_chromium(chromium, bare.as_uri(), [f"--screenshot={still}"], work)
                check_quiet(err, netlog, bare.as_uri(), "screenshot without the page's code")
                off = check_screenshot(still, "3-D view without the page's code", blank_ok=True)
                # The drawn points: a few sampled pixels for each of up to 200 points.
                need = 2 * min(expected["points"], 200)
                if on - off < need:
                    fail(f"the 3-D view's script adds only {on - off} sampled pixels of saturated colour; "
                         f"expected at least {need} for its points")
                ok(f"the 3-D view's script adds {on - off} sampled pixels of saturated colour (points and legend)")
            keep = os.environ.get("SCREENSHOT_DIR")
            if keep:
                os.makedirs(keep, exist_ok=True)
                for name in os.listdir(work):
                    if name.endswith(".png"):
                        shutil.copy(os.path.join(work, name), keep)
                print(f"  screenshots copied to {keep}")
    except CheckFailed as e:
        print(f"FAILED: {e}", file=sys.stderr)
        return 1
    print("report.html passed every browser check")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
