"""The report: tables carry the JSON's numbers, text from the user's files is escaped in HTML and LaTeX,
the page makes no network request, and it renders in a real browser (headless Chromium).

One small simulated data set is fitted once for the module; its predictor column is named
`<script>alert(1)</script>` and its levels carry LaTeX's special characters.
"""
from __future__ import annotations

import csv
import dataclasses
import html.parser
import io
import json
import math
import os
import re
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest

from conftest import write_case

import bridge
from bridge.reconcile.summary import mixed_summary, report_content
from bridge.render.formats import number
from bridge.render import tables
from bridge.render.report import report_files
from bridge.render.tables import md_escape, tex_escape
from bridge.simulate.growth import GrowthTruth, simulate_growth

SCRIPT = "<script>alert(1)</script>"
CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)
TRUTH = GrowthTruth(n_persons=80, waves=(0.0, 1.0, 2.0, 3.0), mean={"intercept": 20.0, "slope": 1.5},
                    random_cov=((4.0, 0.3), (0.3, 0.5)), residual=1.0, predictors={SCRIPT: "binary:low_%,high&#"},
                    effects={SCRIPT: {"intercept": 1.0, "slope": 0.4}})
DESCRIPTION = {"data": {"layout": "long", "person": "person", "time": "time", "outcome": "outcome"},
               "model": {"kind": "growth", "shape": "linear", "predictors": [SCRIPT],
                         "reference_levels": {SCRIPT: "low_%"}},
               "estimation": {"method": "ml"}}


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    """The reconciliation, its report files (written to a folder) and the JSON result as data."""
    folder = tmp_path_factory.mktemp("report")
    spec = write_case(folder, simulate_growth(TRUTH, 5), DESCRIPTION, "escaping")
    rec = bridge.run(spec)
    files = report_files(report_content(rec))
    out = folder / "out"
    out.mkdir()
    for name, data in files.items():
        (out / name).write_bytes(data)
    return rec, files, json.loads(files["result.json"]), out


def text(files, name: str) -> str:
    return files[name].decode("utf-8")


def test_report_writes_every_figure_and_table(report):
    _, files, _, _ = report
    expected = {"report.html", "result.json", "path-diagram.dot", "path-diagram.svg", "path-diagram.png",
                "trajectories.svg", "trajectories.png", "mixed-model.md", "mixed-model.tex", "correspondence.md",
                "correspondence.tex", "fixed-effects.csv", "variance-components.csv", "fit.csv", "correspondence.csv"}
    assert expected <= set(files)


def test_csv_tables_carry_the_json_numbers_exactly(report):
    rec, files, result, _ = report
    quantities = {q["key"]: q for q in result["quantities"]}
    rows = list(csv.DictReader(io.StringIO(text(files, "correspondence.csv"))))
    assert [r["quantity"] for r in rows] == list(quantities)
    for row in rows:
        q = quantities[row["quantity"]]
        assert float(row["SEM estimate"]) == q["sem"]["estimate"]
        assert float(row["mixed estimate"]) == q["mixed"]["estimate"]
        assert float(row["difference"]) == q["difference"]
        assert row["verdict"] == q["verdict"]
    fixed = list(csv.DictReader(io.StringIO(text(files, "fixed-effects.csv"))))
    keys = [f.key for f in mixed_summary(rec).fixed]
    assert len(fixed) == len(keys) == 4
    for row, key in zip(fixed, keys):
        assert float(row["estimate"]) == quantities[key]["mixed"]["estimate"]
        assert float(row["SE"]) == quantities[key]["mixed"]["se"]


@pytest.mark.parametrize("name", ["correspondence.md", "correspondence.tex"])
def test_markdown_and_latex_tables_carry_the_json_numbers(report, name):
    _, files, result, _ = report
    lines = text(files, name).splitlines()
    escape = md_escape if name.endswith(".md") else tex_escape
    for q in result["quantities"]:
        line = next(line for line in lines if escape(q["key"]) in line)
        cells = [c.strip() for c in re.split(r"(?<!\\)[|&]", line.replace(r"\&", "").replace(r"\|", ""))]
        for value in (q["sem"]["estimate"], q["mixed"]["estimate"], q["difference"]):
            assert number(value) in cells, (q["key"], line)


def test_mixed_model_statistics(report):
    rec, files, result, _ = report
    summary = mixed_summary(rec)
    for effect in summary.fixed:
        assert effect.z == pytest.approx(effect.estimate / effect.se)
        assert effect.upper - effect.lower == pytest.approx(2 * 1.959964 * effect.se, rel=1e-6)
        assert 0 <= effect.p <= 1
    fit = summary.fit
    assert (fit.persons, fit.observations) == (80, 320)
    assert fit.parameters == 4 + 3 + 1   # fixed effects, person-effect covariance, residual
    assert fit.log_likelihood == pytest.approx(result["log_likelihood"]["mixed"])
    assert fit.aic == pytest.approx(-2 * fit.log_likelihood + 16)
    assert fit.bic == pytest.approx(-2 * fit.log_likelihood + 8 * math.log(320))
    assert "AIC" in text(files, "mixed-model.md") and "log-likelihood" in text(files, "fit.csv")


def test_person_effects_are_a_matrix_with_correlations_above_the_diagonal(report):
    _, files, result, _ = report
    q = {item["key"]: item["mixed"] for item in result["quantities"]}
    a, b, c, e = (q[k] for k in ("var.intercept", "cov.intercept.slope", "var.slope", "var.residual"))

    def bracketed(item) -> str:
        return f"{item['estimate']!r} ({item['se']!r})"

    # correlation = covariance / (SD x SD) (common practice)
    r = b["estimate"] / math.sqrt(a["estimate"] * c["estimate"])
    rows = list(csv.reader(io.StringIO(text(files, "variance-components.csv"))))
    assert rows[0] == ["person effect", "intercept", "slope"]
    assert rows[1][:2] == ["intercept", bracketed(a)] and float(rows[1][2]) == pytest.approx(r, rel=1e-12)
    assert rows[2] == ["slope", bracketed(b), bracketed(c)]
    assert rows[3] == ["residual variance", bracketed(e), ""]
    md = text(files, "mixed-model.md")
    assert f"| intercept | {number(a['estimate'])} ({number(a['se'])}) | {number(r)} |" in md
    assert "| SD |" not in md and "| correlation |" not in md
    shown = f"{number(c['estimate'])} ({number(c['se'])})"
    assert f"slope & {number(b['estimate'])} ({number(b['se'])}) & {shown}" in text(files, "mixed-model.tex")
    assert f"<td class=\"num\">{shown}</td>" in text(files, "report.html")


def test_under_reml_the_information_criteria_use_the_reml_criterion(report):
    rec, _, _, _ = report
    reml = dataclasses.replace(rec, data={**rec.data, "method": "reml"},
                               log_likelihood={**rec.log_likelihood, "mixed": -600.0})
    fit = mixed_summary(reml).fit
    assert fit.criterion == "REML criterion" and fit.log_likelihood == -600.0
    assert fit.aic == pytest.approx(1200.0 + 16) and fit.bic == pytest.approx(1200.0 + 8 * math.log(320))
    assert "the REML criterion" in tables.fit_grid(mixed_summary(reml)).notes[0]


def test_latex_escapes_special_characters(report):
    assert tex_escape("a_b % c & d # $ { } ~ ^ \\") == (r"a\_b \% c \& d \# \$ \{ \} \textasciitilde{} "
                                                         r"\textasciicircum{} \textbackslash{}")
    _, files, _, _ = report
    tex = text(files, "correspondence.tex") + text(files, "mixed-model.tex")
    assert r"\textless{}script\textgreater{}alert(1)\textless{}/script\textgreater{}{[}high\&\#{]}" in tex
    body = tex.replace("\\\\", "").replace(r"\&", "").replace(r"\%", "").replace(r"\#", "").replace(r"\_", "")
    assert "%" not in body and "#" not in body and "_" not in body and "<" not in body
    for line in tex.splitlines():   # unescaped & only as column separators
        if line.endswith(r"\\"):
            assert line.replace(r"\&", "").count("&") == line.count(" & ")


class _Tags(html.parser.HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.urls, self.text = [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.urls += [value for name, value in attrs if name in ("src", "href") and value]

    def handle_data(self, data):
        self.text.append(data)


def test_html_shows_user_text_as_text_never_markup(report):
    _, files, _, _ = report
    page = text(files, "report.html")
    parsed = _Tags()
    parsed.feed(page)
    assert "script" not in parsed.tags and "<script" not in page.lower()
    assert f"{SCRIPT}[high&#]" in "".join(parsed.text)
    assert "&lt;script&gt;alert(1)&lt;/script&gt;[high&amp;#]" in page
    assert md_escape(SCRIPT) in text(files, "correspondence.md") and SCRIPT not in text(files, "correspondence.md")


def test_html_requests_nothing_from_the_network(report):
    _, files, _, _ = report
    page = text(files, "report.html")
    parsed = _Tags()
    parsed.feed(page)
    assert parsed.urls and all(url.startswith("data:") for url in parsed.urls)
    assert not re.search(r"https?://|url\(|@import|//[a-z0-9.-]+\.[a-z]{2,}/", page, re.I)
    assert "default-src 'none'" in page
    for section in ("model", "trajectories", "correspondence", "timing", "explanations", "specifications", "caution"):
        assert f'<section id="{section}">' in page
    assert "computational consistency" in page


# ---------------------------------------------------------------------------- the browser

class Browser:
    """Headless Chromium driven through the DevTools protocol on a loopback port."""

    FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
             "--disable-component-update", "--disable-sync", "--no-first-run"]

    def __init__(self, profile: str):
        import websocket

        self.proc = subprocess.Popen([CHROMIUM, *self.FLAGS, f"--user-data-dir={profile}",
                                      "--remote-debugging-port=0", "about:blank"],
                                     stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
        url, began = None, time.monotonic()
        while url is None and time.monotonic() - began < 60:
            line = self.proc.stderr.readline()
            found = re.search(r"DevTools listening on (ws://\S+)", line)
            url = found.group(1) if found else (None if line else self._gone())
        self.ws = websocket.create_connection(url, suppress_origin=True, timeout=60)
        self.counter, self.events = 0, []
        target = self.call("Target.createTarget", {"url": "about:blank"})["targetId"]
        self.session = self.call("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        for domain in ("Page", "Network", "Runtime", "Log"):
            self.call(f"{domain}.enable", session=self.session)

    def _gone(self):
        raise RuntimeError(f"chromium ended early with code {self.proc.poll()}")

    def call(self, method: str, params: dict | None = None, session: str | None = None) -> dict:
        self.counter += 1
        message = {"id": self.counter, "method": method, "params": params or {}}
        if session:
            message["sessionId"] = session
        self.ws.send(json.dumps(message))
        while True:
            reply = json.loads(self.ws.recv())
            if reply.get("id") == self.counter:
                assert "error" not in reply, reply
                return reply.get("result", {})
            self.events.append(reply)

    def open(self, path: Path) -> list[dict]:
        """Load a page from disk; return the events it caused."""
        self.events = []
        self.call("Page.navigate", {"url": path.as_uri()}, self.session)
        began = time.monotonic()
        while not any(e.get("method") == "Page.loadEventFired" for e in self.events):
            assert time.monotonic() - began < 60, "the page did not finish loading"
            self.events.append(json.loads(self.ws.recv()))
        self.call("Runtime.evaluate", {"expression": "new Promise(r => setTimeout(r, 300))", "awaitPromise": True},
                  self.session)
        return list(self.events)

    def evaluate(self, expression: str):
        return self.call("Runtime.evaluate", {"expression": expression, "returnByValue": True},
                         self.session)["result"].get("value")

    def close(self):
        self.ws.close()
        self.proc.terminate()
        self.proc.wait(timeout=30)


def problems(events: list[dict]) -> tuple[list[str], list[str]]:
    """Console errors (and uncaught exceptions) and requests for anything but the file itself or inline data."""
    errors, requests = [], []
    for event in events:
        method, params = event.get("method"), event.get("params", {})
        if method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
            errors.append(str(params.get("args")))
        elif method == "Runtime.exceptionThrown":
            errors.append(str(params.get("exceptionDetails")))
        elif method == "Log.entryAdded" and params["entry"]["level"] == "error":
            errors.append(params["entry"]["text"])
        elif method == "Network.requestWillBeSent":
            url = params["request"]["url"]
            if not (url.startswith("data:") or url.startswith("file:")):
                requests.append(url)
    return errors, requests


def distinct_colours(png: Path) -> int:
    from PIL import Image

    with Image.open(png) as image:
        return len(image.convert("RGB").getcolors(maxcolors=1 << 20) or [])


needs_chromium = pytest.mark.skipif(CHROMIUM is None and not os.environ.get("CI"),
                                    reason="chromium is not installed (it is required in CI)")


@needs_chromium
def test_report_renders_in_a_browser_without_errors_or_requests(report, tmp_path):
    assert CHROMIUM, "chromium must be installed in CI (.ci/run installs the Debian package)"
    _, _, _, out = report
    bad = tmp_path / "bad.html"   # the checks must catch a page that misbehaves
    bad.write_text('<img src="http://127.0.0.1:9/x.png"><script>console.error("broken")</script>', encoding="utf-8")
    browser = Browser(str(tmp_path / "profile"))
    try:
        errors, requests = problems(browser.open(bad))
        assert requests == ["http://127.0.0.1:9/x.png"] and any("broken" in e for e in errors)
        errors, requests = problems(browser.open(out / "report.html"))
        assert errors == [] and requests == []
        assert browser.evaluate("document.querySelectorAll('script').length") == 0
        assert SCRIPT in browser.evaluate("document.body.innerText")
        assert browser.evaluate("Array.from(document.images).every(i => i.complete && i.naturalWidth > 100)")
    finally:
        browser.close()
    shot = tmp_path / "report.png"
    done = subprocess.run([CHROMIUM, *Browser.FLAGS, f"--user-data-dir={tmp_path / 'profile2'}",
                           f"--screenshot={shot}", "--window-size=1280,1600", (out / "report.html").as_uri()],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0 and shot.exists(), done.stderr[-2000:]
    assert distinct_colours(shot) > 50


def test_demo_writes_the_report(tmp_path):
    done = subprocess.run([sys.executable, "-m", "bridge.cli", "demo", "--out", str(tmp_path / "demo"), "--quiet"],
                          capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr
    folder = tmp_path / "demo" / "sight_reading-report"
    assert f"report {folder / 'report.html'}" in done.stdout
    content = (folder / "report.html").read_text(encoding="utf-8")
    assert "sight_reading.yaml" in content and "format[private]" in content
    assert {"path-diagram.svg", "path-diagram.dot", "mixed-model.tex", "trajectories.png"} <= \
        {p.name for p in folder.iterdir()}
    reports = sorted(p.parent.name for p in (tmp_path / "demo").glob("*/report.html"))
    assert len(reports) == 2 and all(name.endswith("-report") for name in reports)
    weekly = tmp_path / "demo" / "weekly_practice-report"
    assert {"path-diagram.svg", "path-diagram.dot", "standardised-paths.svg", "lagged-regressions.tex",
            "lagged-coefficients.csv"} <= {p.name for p in weekly.iterdir()}
    page = (weekly / "report.html").read_text(encoding="utf-8")
    assert "path figure and lagged regressions" in page and "Standardised paths over the waves" in page
