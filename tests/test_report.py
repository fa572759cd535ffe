"""Tests of partload.present.report and ``partload report``: one-page HTML reports.

Three reports are written through the command line: a point of the
nozzle-governed industrial demo unit (governing stage, process steam), a
small load sweep of the demo reheat unit with and without heater HP8, and a
short profile whose time stamps cross a month boundary (all invented data).
The pages are checked as text (self-contained, provenance, totals) and in a
real headless Chromium driven over the DevTools protocol: the page loads with
no console errors and no network requests, every chart and diagram has a
non-zero rendered size, and a screenshot is not blank.
"""

from __future__ import annotations

import base64
import hashlib
import html
import io
import json
import os
import re
import shutil
import subprocess
import time
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
from matplotlib.image import imread
from partload.cli.main import main
from partload.present.charts import CHARTS
from partload.present.report import profile_totals
from partload.store import read_study

ROOT = Path(__file__).resolve().parents[1]
MODEL = ROOT / "models" / "demo_reheat_unit.toml"
POINT_CASE = ROOT / "cases" / "industrial_nozzle_part_load.toml"
PROFILE = """time,output [MW],exhaust_pressure [kPa]
2030-01-31 22:00,250,5.0
2030-01-31 23:00,230,5.1
2030-02-01 00:00,210,5.2
2030-02-01 01:00,200,5.0
2030-02-01 02:00,215,4.9
"""


def _study(folder: Path, name: str, body: str) -> Path:
    case = folder / f"{name}.toml"
    case.write_text(f"model = {json.dumps(str(MODEL))}\n" + body, encoding="utf-8")
    out = folder / f"{name}.h5"
    assert main(["study", str(case), "--workers", "1", "--output", str(out), "-q"]) == 0
    return out


@pytest.fixture(scope="module")
def reports(tmp_path_factory):
    folder = tmp_path_factory.mktemp("reports")
    sweep = _study(folder, "sweep", '[sweep]\nthrottle_flow_fraction = {from = 0.4, to = 1.0, '
                   'points = 4}\nheater_out = ["none", "HP8"]\n')
    (folder / "p.csv").write_text(PROFILE, encoding="utf-8")
    profile = _study(folder, "year", '[profile]\nfile = "p.csv"\n')
    out = {"sweep_h5": sweep, "profile_h5": profile}
    for key, src in (("point", POINT_CASE), ("sweep", sweep), ("profile", profile)):
        path = folder / f"{key}.html"
        assert main(["report", str(src), "--output", str(path)]) == 0
        out[key] = path
    for key, src in (("point_us", POINT_CASE), ("profile_us", profile)):
        path = folder / f"{key}.html"
        assert main(["report", str(src), "--output", str(path), "--units", "us"]) == 0
        out[key] = path
    return out


class _Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))


def _tags(path: Path):
    p = _Tags()
    p.feed(path.read_text(encoding="utf-8"))
    return p.tags


@pytest.mark.parametrize("key", ["point", "sweep", "profile", "point_us", "profile_us"])
def test_page_is_self_contained(reports, key):
    tags = _tags(reports[key])
    for tag, attrs in tags:
        for a in ("src", "href"):
            if a in attrs:
                assert attrs[a].startswith("data:"), f"{tag} {a}={attrs[a][:40]} needs a fetch"
        assert tag not in ("script", "link", "iframe")
    text = html.unescape(reports[key].read_text(encoding="utf-8"))
    assert "manufacturer's limits" in text


def test_point_report_names_files_hashes_and_cautions(reports):
    text = reports["point"].read_text(encoding="utf-8")
    case_sha = hashlib.sha256(POINT_CASE.read_bytes()).hexdigest()
    model_file = ROOT / "models" / "demo_industrial_nozzle_unit.toml"
    model_sha = hashlib.sha256(model_file.read_bytes()).hexdigest()
    assert POINT_CASE.name in text and case_sha in text
    assert model_file.name in text and model_sha in text
    tags = _tags(reports["point"])
    assert sum(1 for t, a in tags if t == "svg" and a.get("class") == "heat-balance") == 2
    assert "Difference from design" in text
    ids = [a["id"] for _t, a in tags if "id" in a]
    assert ids and len(ids) == len(set(ids))  # two diagrams on one page: no id twice
    assert "governing stage" in text and "V1" in text


def test_sweep_report_has_every_chart_and_a_series_table(reports):
    tags = _tags(reports["sweep"])
    charts = [a for t, a in tags if t == "img" and a.get("class") == "chart"]
    assert [a["alt"] for a in charts] == list(CHARTS)
    text = reports["sweep"].read_text(encoding="utf-8")
    assert "HP8 out" in text or "HP8" in text
    # 8 points: 4 loads x 2 series (the case above)
    assert "8 points" in text


def test_profile_totals_are_sums_of_the_points(reports):
    st = read_study(reports["profile_h5"])
    rows = profile_totals(st)
    # two months in the profile above: 2 hours in January, 3 in February
    assert [r["period"] for r in rows] == ["2030-01", "2030-02", "year"]
    assert [r["hours"] for r in rows] == [2.0, 3.0, 5.0]
    P = st.total("generator_output")
    Q = st.total("heat_added")
    # hand calculation: each point stands for one hour (the step of its time stamps)
    assert rows[0]["energy"] == pytest.approx(np.sum(P[:2]) / 1e6, rel=1e-12)
    assert rows[2]["energy"] == pytest.approx(rows[0]["energy"] + rows[1]["energy"],
                                              rel=1e-12)
    assert rows[2]["heat_rate"] == pytest.approx(np.sum(Q) / np.sum(P) * 3600, rel=1e-12)
    # demand is met: each output is the profile's (invented values above)
    assert rows[2]["energy"] == pytest.approx(250 + 230 + 210 + 200 + 215, rel=1e-6)
    text = reports["profile"].read_text(encoding="utf-8")
    for name in ("time_series", "load_duration"):
        assert f'alt="{name}"' in text
    assert "2030-02" in text


# US customary labels and the metric ones they replace, as tables and diagrams write
# them (the case's own description, "process steam 25 kg/s", is the user's text)
US_LABELS = ("[psia]", "[degF]", "[Btu/lb]", "[klb/h]", ">Btu/kWh<", " psia", " \u00b0F",
             " Btu/lb", " klb/h", " Btu/kWh", " inHg")
METRIC_LABELS = ("[bar]", "[degC]", "[kJ/kg]", "[kg/s]", ">kJ/kWh<", " bar</text>",
                 " \u00b0C", " kJ/kg", " kg/s</text>", " kJ/kWh", " kPa")


def _visible(path: Path) -> str:
    """The page's text and markup without its embedded images, entities resolved."""
    text = re.sub(r'src="data:[^"]*"', "", path.read_text(encoding="utf-8"))
    return html.unescape(text.replace("<br>", " "))


def test_us_reports_label_us_units(reports):
    text = _visible(reports["point_us"])
    for label in US_LABELS:
        assert label in text, label
    for label in METRIC_LABELS:
        assert label not in text, label
    # the metric page is unchanged: metric labels, no US ones but the totals' second
    # heat rate in Btu/kWh
    metric = _visible(reports["point"])
    assert "[bar]" in metric and "[psia]" not in metric and " klb/h" not in metric
    # the profile's tables: flows in klb/h, heat rates in Btu/kWh
    profile = _visible(reports["profile_us"])
    assert "[klb/h]" in profile and "[Btu/kWh]" in profile
    assert "[kg/s]" not in profile and "[kJ/kWh]" not in profile
    # the year's average heat rate: the metric page's value over 1.055056 kJ per Btu
    # (International Table Btu), to the one decimal the page shows
    st = read_study(reports["profile_h5"])
    hr = profile_totals(st)[-1]["heat_rate"]  # kJ/kWh
    assert f"{hr:,.1f}" in _visible(reports["profile"])
    assert f"{hr / 1.055056:,.1f}" in profile


def test_profile_times_a_sweep_axis_totals_each_series(tmp_path):
    (tmp_path / "p.csv").write_text(PROFILE, encoding="utf-8")
    h5 = _study(tmp_path, "ps", '[profile]\nfile = "p.csv"\n[sweep]\n'
                'heater_out = ["none", "HP8"]\n')
    st = read_study(h5)
    none, hp8 = profile_totals(st, 0), profile_totals(st, 1)
    assert [r["hours"] for r in none] == [r["hours"] for r in hp8] == [2.0, 3.0, 5.0]
    # the same demand in both series (the profile's outputs, invented above)
    assert none[-1]["energy"] == pytest.approx(hp8[-1]["energy"], rel=1e-9)
    # HP8 out of service: higher heat rate at the same output (less regeneration;
    # common practice for a top heater out of service)
    assert hp8[-1]["heat_rate"] > none[-1]["heat_rate"]
    out = tmp_path / "ps.html"
    assert main(["report", str(h5), "--output", str(out)]) == 0
    text = out.read_text(encoding="utf-8")
    assert "<h3>heater_out=none</h3>" in text and "<h3>heater_out=HP8</h3>" in text


def test_a_point_of_a_study_is_re_solved_as_stored(reports, tmp_path):
    from partload.present.report import study_point
    from partload.solve.point import solve_point

    st = read_study(reports["sweep_h5"])
    k = 6  # 4 loads x 2 series: the third load with HP8 out
    case, cond, label, _rows, backend, check = study_point(reports["sweep_h5"], k)
    assert label == st.labels[k] and "HP8" in label
    r = solve_point(case.model, cond, backend, check_limits=check)
    # identity: the same conditions solved again give the stored answer (both to the
    # solver's 1e-10 residual; the study started from a neighbour, this from design)
    for name in ("generator_output", "heat_rate", "throttle_pressure"):
        assert r.totals[name] == pytest.approx(st.total(name)[k], rel=1e-8), name
    out = tmp_path / "p6.html"
    assert main(["report", str(reports["sweep_h5"]), "--point", str(k), "--output", str(out),
                 "--svg"]) == 0
    text = html.unescape(out.read_text(encoding="utf-8"))
    assert label in text and f"{r.totals['generator_output'] / 1e6:.2f} MW" in text
    assert (tmp_path / f"sweep_point{k}_diagram.svg").is_file()
    assert main(["report", str(reports["sweep_h5"]), "--point", "8"]) == 2  # 0 to 7


def test_a_point_of_a_study_whose_case_changed_is_refused(tmp_path):
    h5 = _study(tmp_path, "small", "[sweep]\nthrottle_flow_fraction = [0.5, 1.0]\n")
    case = tmp_path / "small.toml"
    case.write_text(case.read_text(encoding="utf-8") + "# edited\n", encoding="utf-8")
    assert main(["report", str(h5), "--point", "0"]) == 3


def test_report_of_a_file_that_is_neither_is_refused(tmp_path):
    bad = tmp_path / "notes.txt"
    bad.write_text("x", encoding="utf-8")
    assert main(["report", str(bad)]) == 2


# ---------------------------------------------------------------- headless Chromium

def _browser() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome", "chrome"):
        found = shutil.which(name)
        if found:
            return found
    return None


class _DevTools:
    """Chromium driven over ``--remote-debugging-pipe`` (JSON messages separated by
    NUL bytes on file descriptors 3 and 4 of the browser)."""

    def __init__(self, exe: str, profile: Path):
        to_browser_r, self._w = os.pipe()
        self._r, from_browser_w = os.pipe()

        def fds():
            # through fresh copies: a pipe end may already be 3 or 4 (and not inheritable)
            a, b = os.dup(to_browser_r), os.dup(from_browser_w)
            os.dup2(a, 3)
            os.dup2(b, 4)

        self.proc = subprocess.Popen(
            [exe, "--headless", "--no-sandbox", "--disable-gpu", "--remote-debugging-pipe",
             "--no-first-run", "--hide-scrollbars", f"--user-data-dir={profile}",
             "--window-size=1400,1000", "about:blank"],
            preexec_fn=fds, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL, close_fds=False)
        os.close(to_browser_r)
        os.close(from_browser_w)
        self._buf = b""
        self._id = 0
        self.events: list[dict] = []

    def _read(self, deadline: float) -> dict:
        while b"\0" not in self._buf:
            if time.monotonic() > deadline:
                raise TimeoutError("no answer from the browser")
            chunk = os.read(self._r, 1 << 20)
            if not chunk:
                raise RuntimeError("the browser closed its pipe")
            self._buf += chunk
        msg, self._buf = self._buf.split(b"\0", 1)
        return json.loads(msg)

    def call(self, method: str, session: str | None = None, timeout: float = 30.0,
             **params) -> dict:
        self._id += 1
        msg = {"id": self._id, "method": method, "params": params}
        if session:
            msg["sessionId"] = session
        os.write(self._w, json.dumps(msg).encode() + b"\0")
        deadline = time.monotonic() + timeout
        while True:
            m = self._read(deadline)
            if m.get("id") == self._id:
                if "error" in m:
                    raise RuntimeError(f"{method}: {m['error']}")
                return m.get("result", {})
            self.events.append(m)

    def wait_for(self, method: str, timeout: float = 30.0) -> dict:
        for i, m in enumerate(self.events):
            if m.get("method") == method:
                return self.events.pop(i)
        deadline = time.monotonic() + timeout
        while True:
            m = self._read(deadline)
            if m.get("method") == method:
                return m
            self.events.append(m)

    def close(self) -> None:
        try:
            self.call("Browser.close", timeout=5)
        except (OSError, RuntimeError, TimeoutError):
            pass
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        os.close(self._r)
        os.close(self._w)


_MEASURE = """JSON.stringify(Array.from(document.querySelectorAll('img.chart, svg.heat-balance'))
  .map(e => { const r = e.getBoundingClientRect();
    return {tag: e.tagName.toLowerCase(), name: e.getAttribute('alt') || e.getAttribute('class'),
            width: r.width, height: r.height,
            decoded: e.tagName.toLowerCase() === 'img' ? (e.complete && e.naturalWidth > 0)
                                                       : true}; }))"""


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    exe = _browser()
    if exe is None:
        pytest.skip("no Chromium or Chrome found on PATH (chromium, chromium-browser, "
                    "google-chrome); .ci/run installs the Debian package")
    return exe


@pytest.mark.parametrize("key,n_svg", [("point", 2), ("sweep", 0), ("profile", 0),
                                       ("point_us", 2)])
def test_page_renders_in_headless_chromium(reports, browser, tmp_path, key, n_svg):
    page = reports[key]
    tools = _DevTools(browser, tmp_path / "profile")
    try:
        target = tools.call("Target.createTarget", url="about:blank")["targetId"]
        session = tools.call("Target.attachToTarget", targetId=target,
                             flatten=True)["sessionId"]
        for domain in ("Page", "Runtime", "Log", "Network"):
            tools.call(f"{domain}.enable", session)
        tools.call("Page.navigate", session, url=page.as_uri())
        tools.wait_for("Page.loadEventFired")
        shapes = json.loads(tools.call("Runtime.evaluate", session, expression=_MEASURE,
                                       returnByValue=True)["result"]["value"])
        metrics = tools.call("Page.getLayoutMetrics", session)["cssContentSize"]
        shot = tools.call("Page.captureScreenshot", session, format="png",
                          captureBeyondViewport=True,
                          clip={"x": 0, "y": 0, "width": min(metrics["width"], 2400),
                                "height": min(metrics["height"], 4000), "scale": 0.5})
        events = list(tools.events)
    finally:
        tools.close()
    errors = [e for e in events
              if e.get("method") == "Runtime.exceptionThrown"
              or (e.get("method") == "Runtime.consoleAPICalled"
                  and e["params"]["type"] in ("error", "assert"))
              or (e.get("method") == "Log.entryAdded"
                  and e["params"]["entry"]["level"] == "error")]
    assert not errors, f"console errors: {errors}"
    fetched = [e["params"]["request"]["url"][:80] for e in events
               if e.get("method") == "Network.requestWillBeSent"
               and not e["params"]["request"]["url"].startswith(("file:", "data:"))]
    assert not fetched, f"the page fetched {fetched}"
    svgs = [s for s in shapes if s["tag"] == "svg"]
    imgs = [s for s in shapes if s["tag"] == "img"]
    assert len(svgs) == n_svg
    n_charts = {"point": 0, "sweep": len(CHARTS), "profile": len(CHARTS) + 2,
                "point_us": 0}[key]
    assert len(imgs) == n_charts
    for s in shapes:
        assert s["width"] > 100 and s["height"] > 100, s
        assert s["decoded"], f"{s['name']} did not decode"
    img = imread(io.BytesIO(base64.b64decode(shot["data"])), format="png")[..., :3]
    not_white = np.any(img < 0.9, axis=-1).mean()
    assert not_white > 0.01, f"the screenshot of {page.name} is blank"
    assert img.std() > 0.05


def test_dump_dom_holds_the_drawn_page(reports, browser, tmp_path):
    # the same page through --dump-dom: the DOM the browser built has the diagram's
    # text (every steam-path component of the industrial unit)
    out = subprocess.run(
        [browser, "--headless", "--no-sandbox", "--disable-gpu",
         f"--user-data-dir={tmp_path / 'p'}", "--dump-dom", reports["point"].as_uri()],
        capture_output=True, text=True, timeout=60, check=True)
    dom = out.stdout
    for name in ("governing stage", "HP1", "HP2", "LP1", "LP2", "LP control valve",
                 "deaerator", "feed pump"):
        assert re.search(rf">\s*{re.escape(name)}\s*<", dom), name


def test_dump_dom_of_the_us_report_holds_us_labels(reports, browser, tmp_path):
    # the DOM Chromium built from the US page: its diagrams and tables speak psia,
    # degF, Btu/lb, klb/h and Btu/kWh, and none of the metric units
    out = subprocess.run(
        [browser, "--headless", "--no-sandbox", "--disable-gpu",
         f"--user-data-dir={tmp_path / 'p'}", "--dump-dom", reports["point_us"].as_uri()],
        capture_output=True, text=True, timeout=60, check=True)
    dom = html.unescape(out.stdout.replace("<br>", " "))
    for label in US_LABELS:
        assert label in dom, label
    for label in METRIC_LABELS:
        assert label not in dom, label
    # the diagram's box in the DOM: the heat rate in Btu/kWh
    assert re.search(r"turbine-cycle heat rate [\d.]+ Btu/kWh", dom)
