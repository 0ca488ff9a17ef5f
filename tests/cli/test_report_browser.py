"""The HTML report in a real browser. Writes the demo study, fits it (the fit writes the
report), fits its region tables, pools the images and writes the report again with the
group results; then opens every page of both reports in headless Chromium (Debian's
/usr/bin/chromium with the flags below and a fresh profile), driven over the DevTools
protocol on a pipe, with JavaScript disabled. For each page it asserts: no console
message, no log entry of level warning or error (a blocked or failed load is one: the
pages forbid every source but inline data), no failed request, a screenshot that is not
blank, and the expected section headings, pictures and links in the DOM. A planted page
with a missing picture and a blank page must be caught, so the checks can fail."""
import base64
import html.parser
import json
import os
import select
import shutil
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.join(os.environ["BOLDSUM_SOURCE_DIR"], "tests", "reference"))
from png_reader import read_png  # noqa: E402

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from checks import boldsum, check, finish  # noqa: E402

CHROMIUM = "/usr/bin/chromium"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def run(*args):
    """boldsum with `args`, its output printed when it fails."""
    result = boldsum(*args)
    if result.returncode != 0:
        print(result.stdout + result.stderr)
    return result


class Browser:
    """Chromium with --remote-debugging-pipe: commands on fd 3, replies on fd 4, each a JSON
    message ended by a NUL byte."""

    def __init__(self, profile):
        to_r, to_w = os.pipe()
        from_r, from_w = os.pipe()

        def wire():
            os.dup2(to_r, 3)
            os.dup2(from_w, 4)

        self.process = subprocess.Popen(
            [CHROMIUM, *FLAGS, "--user-data-dir=" + profile, "--remote-debugging-pipe",
             "about:blank"], pass_fds=(3, 4), preexec_fn=wire, stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        os.close(to_r)
        os.close(from_w)
        self.out, self.inp, self.buffer, self.last_id, self.events = to_w, from_r, b"", 0, []
        target = self.send("Target.createTarget", {"url": "about:blank"})["targetId"]
        self.session = self.send("Target.attachToTarget",
                                 {"targetId": target, "flatten": True})["sessionId"]
        for method in ("Runtime.enable", "Log.enable", "Network.enable", "Page.enable"):
            self.send(method, session=True)
        self.send("Emulation.setScriptExecutionDisabled", {"value": True}, session=True)
        self.send("Emulation.setDeviceMetricsOverride",
                  {"width": 1280, "height": 1600, "deviceScaleFactor": 1, "mobile": False},
                  session=True)

    def send(self, method, params=None, session=False, timeout=60):
        self.last_id += 1
        message = {"id": self.last_id, "method": method, "params": params or {}}
        if session:
            message["sessionId"] = self.session
        os.write(self.out, json.dumps(message).encode() + b"\0")
        reply = self.wait(lambda m: m.get("id") == self.last_id, timeout)
        if "error" in reply:
            raise RuntimeError("%s: %s" % (method, reply["error"]))
        return reply["result"]

    def wait(self, wanted, timeout=60):
        deadline = time.time() + timeout
        while True:
            while b"\0" in self.buffer:
                raw, self.buffer = self.buffer.split(b"\0", 1)
                message = json.loads(raw)
                if wanted(message):
                    return message
                if "method" in message:
                    self.events.append(message)
            left = deadline - time.time()
            if left <= 0:
                raise TimeoutError("no reply from Chromium")
            if select.select([self.inp], [], [], left)[0]:
                chunk = os.read(self.inp, 1 << 20)
                if not chunk:
                    raise EOFError("Chromium closed the pipe")
                self.buffer += chunk

    def open(self, path):
        """Loads a page; returns (problems, screenshot PNG bytes, DOM HTML)."""
        self.events = []
        self.send("Page.navigate", {"url": "file://" + path}, session=True)
        self.wait(lambda m: m.get("method") == "Page.loadEventFired")
        # The top 1280 x 1600 pixels at a quarter of the size: enough to tell a blank page.
        clip = {"x": 0, "y": 0, "width": 1280, "height": 1600, "scale": 0.25}
        shot = base64.b64decode(self.send("Page.captureScreenshot", {"format": "png", "clip": clip},
                                          session=True)["data"])
        root = self.send("DOM.getDocument", {"depth": -1}, session=True)["root"]
        dom = self.send("DOM.getOuterHTML", {"nodeId": root["nodeId"]}, session=True)["outerHTML"]
        problems = []
        for event in self.events:
            method, params = event["method"], event.get("params", {})
            if method in ("Runtime.consoleAPICalled", "Runtime.exceptionThrown"):
                problems.append(method)
            elif method == "Log.entryAdded" and params["entry"]["level"] in ("warning", "error"):
                problems.append("log %s: %s" % (params["entry"]["level"], params["entry"]["text"]))
            elif method == "Network.loadingFailed":
                problems.append("failed request: %s" % params)
            elif method == "Network.responseReceived" and params["response"].get("status", 200) >= 400:
                problems.append("HTTP %s" % params["response"]["status"])
        return problems, shot, dom

    def close(self):
        try:
            self.send("Browser.close", timeout=10)
        except (RuntimeError, TimeoutError, EOFError):
            pass
        try:
            self.process.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.process.kill()


def grey_spread(png):
    """Standard deviation of the grey level and the share of non-white pixels of a PNG."""
    width, _, channels, rows = read_png(png)
    total = squares = count = coloured = 0
    for line in rows:
        for x in range(0, width * channels, channels):
            g = (line[x] + line[x + 1] + line[x + 2]) / 3
            total += g
            squares += g * g
            count += 1
            coloured += g < 250
    mean = total / count
    return (squares / count - mean * mean) ** 0.5, coloured / count


class Outline(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.headings, self.svgs, self.pictures, self.links, self.scripts = [], 0, 0, [], 0
        self._in = None

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag in ("h1", "h2", "h3"):
            self._in = tag
            self.headings.append((tag, ""))
        elif tag == "svg":
            self.svgs += 1
        elif tag in ("image", "img") and (attrs.get("href") or attrs.get("src") or "").startswith(
                "data:image/png;base64,"):
            self.pictures += 1
        elif tag == "a" and "href" in attrs:
            self.links.append(attrs["href"])
        elif tag == "script":
            self.scripts += 1

    def handle_endtag(self, tag):
        if tag == self._in:
            self._in = None

    def handle_data(self, data):
        if self._in:
            tag, text = self.headings[-1]
            self.headings[-1] = (tag, text + data)


def outline(dom):
    parser = Outline()
    parser.feed(dom)
    return parser


STUDY_HEADINGS = ["Subjects", "Pool-ready stacks", "Group results", "How to read this report"]
SUBJECT_HEADINGS = ["Summary", "Design", "Warnings", "Temporal noise", "Contrasts"]

start = time.time()
with tempfile.TemporaryDirectory() as root:
    demo = os.path.join(root, "demo")
    check("demo written", run("demo", demo).returncode == 0)
    fit = run("fit", os.path.join(demo, "demo.yaml"), "--threads", "2")
    images = os.path.join(demo, "results", "report")
    check("fit writes the report and says where", fit.returncode == 0 and
          ("report written: " + os.path.join(images, "index.html")) in fit.stdout, fit.stdout[-400:])
    fit_roi = run("fit", os.path.join(demo, "demo_roi.yaml"), "--threads", "2")
    regions = os.path.join(demo, "results-roi", "report")
    check("fit of the region tables writes its report", fit_roi.returncode == 0 and
          os.path.exists(os.path.join(regions, "index.html")))
    pool = run("pool", os.path.join(demo, "group.yaml"), "--threads", "2")
    check("pool the demo images", pool.returncode == 0)
    report = run("report", os.path.join(demo, "demo.yaml"), "--group",
                 os.path.join(demo, "group.yaml"), "--threads", "2")
    check("report with the group results; residual diagnostics reused from the cache",
          report.returncode == 0 and report.stdout.count("residual diagnostics reused") == 8,
          "%d reused" % report.stdout.count("residual diagnostics reused"))
    print("study written, fitted and reported in %.1f s" % (time.time() - start))

    # A planted page that loads a missing picture: the checks below must catch it.
    planted = os.path.join(images, "planted.html")
    with open(os.path.join(images, "index.html")) as f:
        page = f.read()
    with open(planted, "w") as f:
        f.write(page.replace("</body>", "<img src=\"missing.png\" alt=\"\"></body>"))

    profile = tempfile.mkdtemp(prefix="boldsum-chromium-")
    browser = Browser(profile)
    try:
        problems, _, _ = browser.open(planted)
        check("a page loading a missing picture is caught", len(problems) > 0, str(problems))
        os.remove(planted)
        blank = os.path.join(root, "blank.html")
        with open(blank, "w") as f:
            f.write("<!DOCTYPE html><html><head><title>blank</title></head><body></body></html>\n")
        spread, coloured = grey_spread(browser.open(blank)[1])
        check("a blank page is caught", not (spread > 20 and coloured > 0.02),
              "grey sd %.1f, non-white %.3f" % (spread, coloured))
        for folder, kind in ((images, "images"), (regions, "regions")):
            pages = sorted(p for p in os.listdir(folder) if p.endswith(".html"))
            check(kind + ": index and eight subject pages",
                  pages == ["index.html"] + ["subject-s0%d.html" % s for s in range(1, 9)],
                  str(pages))
            for name in pages:
                problems, shot, dom = browser.open(os.path.join(folder, name))
                label = "%s/%s" % (kind, name)
                check(label + ": no console messages, warnings, errors or failed requests",
                      not problems, "; ".join(problems)[:500])
                spread, coloured = grey_spread(shot)
                check(label + ": screenshot not blank", spread > 20 and coloured > 0.02,
                      "grey sd %.1f, non-white %.3f" % (spread, coloured))
                found = outline(dom)
                h2 = [text.strip() for tag, text in found.headings if tag == "h2"]
                check(label + ": no scripts", found.scripts == 0)
                if name == "index.html":
                    check(label + ": study headings", h2 == STUDY_HEADINGS, str(h2))
                    subject_links = [l for l in found.links if l.startswith("subject-")]
                    check(label + ": links to every subject page",
                          sorted(subject_links) == pages[1:], str(subject_links))
                    check(label + ": every link resolves",
                          all(l.startswith("#") or os.path.exists(os.path.join(folder, l))
                              for l in found.links))
                    if kind == "images":
                        # Group maps: 2 first-level x 2 group contrasts, each a mosaic.
                        h3 = [text.strip() for tag, text in found.headings if tag == "h3"]
                        check(label + ": group maps shown",
                              found.pictures == 4 and "melodies_vs_rest: group_mean (t)" in h3,
                              "%d pictures, %s" % (found.pictures, h3))
                else:
                    check(label + ": subject headings", h2 == SUBJECT_HEADINGS, str(h2))
                    h3 = [text.strip() for tag, text in found.headings if tag == "h3"]
                    check(label + ": design, noise, whiteness and contrast sections",
                          all(h in h3 for h in ("Design of run 1", "Design of run 2",
                                                "AR(1) coefficient, run 1", "Residual whiteness",
                                                "Contrast known_vs_new", "Contrast any_melody")),
                          str(h3))
                    # Images: per run an AR(1) and a whiteness mosaic, one per contrast.
                    want = 2 * 2 + 3 if kind == "images" else 0
                    check(label + ": %d slice pictures" % want, found.pictures == want,
                          str(found.pictures))
                    # Figures: per run the design, its correlations and regressors (6); per run
                    # the AR(1) histogram and map or bars; the whiteness maps or bars; per
                    # contrast its map or bars (a map counts twice: mosaic and colour bar).
                    check(label + ": figures drawn", found.svgs == (22 if kind == "images" else 15),
                          str(found.svgs))
                    check(label + ": link back to the study page", "index.html" in found.links)
    finally:
        browser.close()
        shutil.rmtree(profile, ignore_errors=True)

print("took %.1f s" % (time.time() - start))
finish()
