"""report.html: the demo study's page rendered in a real browser (Debian's headless Chromium) with the network
cut, the DOM it builds checked against series.csv, escaping of user text, and a rebuild with a member missing.

External references: the browser itself (Chromium's own HTML parser, layout and renderer; its net log shows
every request it made) and the CSV the report must match. Nothing here is compared with a computed number of
lcao's beyond what series.csv says.
"""

from __future__ import annotations

import csv
import html.parser
import json
import os
import re
import shutil
import subprocess

import numpy as np
import pytest

from helpers import ROOT
from lcao.cli import main

CHROMIUM_FLAGS = (
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run", "--disable-background-networking",
    "--disable-component-update", "--disable-sync", "--disable-extensions", "--disable-default-apps",
    # the network cut: every host resolves to nothing and every request would go to a closed local port
    "--host-resolver-rules=MAP * ~NOTFOUND", "--proxy-server=127.0.0.1:9", "--proxy-bypass-list=<-loopback>",
)


def chromium() -> str:
    path = shutil.which("chromium") or shutil.which("chromium-browser")
    if path is None:
        if os.environ.get("LCAO_REQUIRE_BROWSER"):
            pytest.fail("Debian's chromium is required here (LCAO_REQUIRE_BROWSER is set) and is not installed")
        pytest.skip("no chromium on this machine (scripts/test installs it where it can; CI requires it)")
    return path


def page_requests(netlog) -> list[str]:
    """URLs the page asked for, from Chromium's net log: requests whose initiator is an origin. The browser's
    own background requests (initiator 'not an origin') are its business and fail on the cut network anyway."""
    text = netlog.read_text()
    try:
        doc = json.loads(text)
    except ValueError:  # the log of a browser that ended before closing it
        doc = json.loads(text.rstrip().rstrip(",") + "]}")
    return [e["params"]["url"] for e in doc.get("events", [])
            if "url" in e.get("params", {}) and "initiator" in e["params"]
            and e["params"]["initiator"] != "not an origin"]


def browse(page, tmp, *extra):
    """Run headless Chromium on a local file with its network cut; returns the completed process."""
    args = [chromium(), *CHROMIUM_FLAGS, f"--user-data-dir={tmp / 'profile'}", *extra, f"file://{page}"]
    return subprocess.run(args, capture_output=True, text=True, timeout=180)


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo study (scripts/harrowgate-study.toml) run into a temporary folder."""
    tmp = tmp_path_factory.mktemp("demo")
    text = open(os.path.join(ROOT, "scripts", "harrowgate-study.toml"), encoding="utf-8").read()
    text = re.sub(r'^out = .*$', 'out = "results"', text, flags=re.M)
    text = re.sub(r'^store = .*$', 'store = "results/store.sqlite"', text, flags=re.M)
    (tmp / "study.toml").write_text(text)
    assert main(["run", str(tmp / "study.toml"), "-q"]) in (0, 1)
    return tmp / "results"


class Dom(html.parser.HTMLParser):
    """The elements the tests look at, from the DOM Chromium dumps."""

    def __init__(self):
        super().__init__()
        self.rows, self.svgs, self.scripts, self.title, self.attrs = [], 0, 0, "", []
        self._cell = None
        self._in_title = False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.attrs.append((tag, attrs))
        if tag == "svg":
            self.svgs += 1
        elif tag == "script":
            self.scripts += 1
        elif tag == "tr" and "member-row" in (a.get("class") or ""):
            self.rows.append({"species": a["data-species"], "level": a["data-level"], "cells": {}})
        elif tag == "td" and a.get("data-key") and self.rows:
            self._cell = [a["data-key"], a.get("data-value", ""), ""]
        elif tag == "h1" and a.get("id") == "title":
            self._in_title = True

    def handle_endtag(self, tag):
        if tag == "td" and self._cell is not None:
            key, raw, shown = self._cell
            self.rows[-1]["cells"][key] = (raw, shown.strip())
            self._cell = None
        elif tag == "h1":
            self._in_title = False

    def handle_data(self, data):
        if self._cell is not None:
            self._cell[2] += data
        if self._in_title:
            self.title += data


def parse(text) -> Dom:
    d = Dom()
    d.feed(text)
    return d


def csv_rows(folder):
    with open(folder / "series.csv", encoding="utf-8", newline="") as fh:
        return list(csv.DictReader(fh))


def groups(results):
    return [results / g["folder"] for g in json.loads((results / "groups.json").read_text())]


def test_demo_report_renders_in_a_real_browser_without_network(demo, tmp_path):
    page = demo / "report.html"
    shot = tmp_path / "page.png"
    netlog = tmp_path / "netlog.json"
    r = browse(page, tmp_path, "--window-size=1200,2400", f"--screenshot={shot}", f"--log-net-log={netlog}")
    assert shot.exists(), r.stderr[-2000:]
    import matplotlib.image

    pixels = matplotlib.image.imread(str(shot))[..., :3]
    assert pixels.shape[0] > 1000 and float(np.var(pixels)) > 0.01  # not blank: text, tables and plots
    assert page_requests(netlog) == []  # the page asked for nothing
    # the check can fail: a page with one remote image is caught by the same net log
    control = tmp_path / "control.html"
    control.write_text('<html><body><img src="http://lcao-control.invalid/x.png">control</body></html>')
    browse(control, tmp_path, f"--screenshot={tmp_path / 'control.png'}", f"--log-net-log={tmp_path / 'control.json'}")
    assert any("lcao-control.invalid" in u for u in page_requests(tmp_path / "control.json"))
    dom = browse(page, tmp_path, "--dump-dom")
    d = parse(dom.stdout)
    expected = [row for g in groups(demo) for row in csv_rows(g)]
    assert len(d.rows) == len(expected) >= 10  # a table row per member
    for row, want in zip(d.rows, expected):
        assert (row["species"], row["level"]) == (want["species"], want["level"])
        raw, shown = row["cells"]["re_angstrom"]
        assert raw == want["re_angstrom"]
        if raw:
            assert shown == f"{float(raw):.5f}"
    curves = sum(1 for g in groups(demo) for sub in g.iterdir() if (sub / "curve.svg").exists())
    assert curves == len(expected)
    assert d.svgs >= curves  # an SVG per curve (and the orbital diagrams)
    assert d.scripts == 0


def test_page_source_names_no_network_address(demo):
    """No http(s) URL outside text: no src, href, url() or other attribute that a browser could follow (the
    SVG namespace declarations xmlns are names, not requests)."""
    d = parse((demo / "report.html").read_text())
    for tag, attrs in d.attrs:
        for name, value in attrs:
            if name.startswith("xmlns") or value is None:
                continue
            assert not re.search(r"https?://", value), (tag, name, value)
    text = (demo / "report.html").read_text()
    assert not re.search(r"url\(\s*['\"]?https?:", text) and "@import" not in text


def test_report_numbers_match_series_csv_exactly(demo):
    from lcao.export.html_report import SUMMARY_COLUMNS

    d = parse((demo / "report.html").read_text())
    expected = [row for g in groups(demo) for row in csv_rows(g)]
    for row, want in zip(d.rows, expected, strict=True):
        for key, _head, fmt in SUMMARY_COLUMNS:
            raw, shown = row["cells"][key]
            if want["status"] in ("failed", "skipped") and key == "verdict":
                continue
            assert raw == want.get(key, ""), (row["species"], key)
            if fmt not in (None, "d") and raw:
                assert shown == format(float(raw), fmt)


def test_title_with_markup_is_shown_as_text(tmp_path):
    study = tmp_path / "study.toml"
    study.write_text('title = "<script>alert(1)</script>"\nout = "out"\n[[group]]\nname = "<b>g</b>"\n'
                     'species = ["H2"]\nlevels = ["HF/STO-3G"]\npoints = 12\n')
    assert main(["run", str(study), "-q", "--no-plots"]) == 0
    page = tmp_path / "out" / "report.html"
    source = page.read_text()
    assert "<script>" not in source and "&lt;script&gt;alert(1)&lt;/script&gt;" in source
    d = parse(browse(page, tmp_path, "--dump-dom").stdout)
    assert d.title == "<script>alert(1)</script>" and d.scripts == 0


def test_rebuild_with_a_member_missing(demo, tmp_path, capsys):
    copy = tmp_path / "results"
    shutil.copytree(demo, copy)
    first = groups(copy)[0]
    gone = sorted(p for p in first.iterdir() if p.is_dir())[0]
    shutil.rmtree(gone)
    (copy / "report.html").unlink()
    assert main(["report", str(copy)]) == 0
    out = capsys.readouterr().out
    assert f"the member folder {gone.name} is missing" in out
    text = (copy / "report.html").read_text()
    assert f"the member folder {gone.name} is missing" in text
    assert len(parse(text).rows) == sum(len(csv_rows(g)) for g in groups(copy))  # the table still lists it


def test_report_of_a_folder_without_results_is_refused(tmp_path, capsys):
    assert main(["report", str(tmp_path)]) == 2
    assert "holds no lcao results" in capsys.readouterr().err
    assert main(["report", str(tmp_path / "nowhere")]) == 2
