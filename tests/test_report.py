"""Reports: the HTML parses and holds every section, images decode, user text is escaped,
reruns are byte-identical, and the methods paragraph carries the fitted numbers."""

import base64
import json
import os
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import numpy as np
import pytest

from jjpattern.cli import main
from jjpattern.demo import demo_files
from jjpattern.outdir import TEMP_MARK


class _Page(HTMLParser):
    def __init__(self):
        super().__init__()
        self.sections, self.images, self.scripts, self.links = [], [], 0, []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag == "section":
            self.sections.append(attrs.get("id"))
        if tag == "img":
            self.images.append(attrs["src"])
        if tag == "script":
            self.scripts += 1
        if tag == "link":
            self.links.append(attrs)


def _parse(path):
    page = _Page()
    page.feed(open(path, encoding="utf-8").read())
    page.close()
    return page


@pytest.fixture(scope="module")
def map_report(map_report_dir):
    return map_report_dir


def test_html_has_every_section_and_embeds_images(map_report):
    page = _parse(map_report / "report.html")
    assert page.sections == ["headline", "flags", "pattern", "map", "current-density",
                             "methods", "provenance", "files"]
    assert page.scripts == 0 and page.links == []
    assert len(page.images) == 3
    for src in page.images:
        assert src.startswith("data:image/png;base64,")
        png = base64.b64decode(src.split(",", 1)[1])
        assert png[:8] == b"\x89PNG\r\n\x1a\n" and png[12:16] == b"IHDR"
    text = (map_report / "report.html").read_text()
    assert "http://" not in text and "https://" not in text


def test_figures_in_three_formats(map_report):
    for stem in ("pattern", "map", "current_density"):
        assert (map_report / f"{stem}.png").read_bytes()[:4] == b"\x89PNG"
        assert (map_report / f"{stem}.pdf").read_bytes()[:4] == b"%PDF"
        root = ET.parse(map_report / f"{stem}.svg").getroot()
        assert root.tag.endswith("svg")
    assert not [p for p in os.listdir(map_report) if ".tmp" in p or TEMP_MARK in p]


def test_result_json_matches_analyze_json(map_report, capsys):
    assert main(["analyze", demo_files()["kt14_j07_map.h5"], "--json", "--tc-K", "9.2"]) == 0
    printed = json.loads(capsys.readouterr().out)
    saved = json.loads((map_report / "result.json").read_text())
    for doc in (printed, saved):
        doc.pop("generated_utc")
    assert printed["fits"] == saved["fits"]
    assert printed["extraction"] == saved["extraction"]


def test_methods_paragraph_carries_the_fitted_numbers(map_report):
    methods = (map_report / "methods.txt").read_text()
    doc = json.loads((map_report / "result.json").read_text())
    periods = re.findall(r"field period of ([0-9.]+) ± ([0-9.]+) mT", methods)
    offsets = re.findall(r"field offset B0 = (-?[0-9.]+) ± ([0-9.]+) mT", methods)
    ic0s = re.findall(r"Ic0 = ([0-9.]+) ± ([0-9.]+) µA", methods)
    assert len(periods) == len(offsets) == len(ic0s) == len(doc["fits"]) == 2
    for fit, p, b0, ic in zip(doc["fits"], periods, offsets, ic0s, strict=True):
        # Printed to the error's second significant digit: within a tenth of the error.
        assert abs(float(p[0]) * 1e-3 - fit["period_T"]) <= 0.1 * fit["period_stderr_T"]
        assert float(p[1]) * 1e-3 == pytest.approx(fit["period_stderr_T"], rel=0.05)
        assert abs(float(b0[0]) * 1e-3 - fit["field_offset_T"]) <= 0.1 * fit[
            "field_offset_stderr_T"]
        assert abs(float(ic[0]) * 1e-6 - fit["ic0_A"]) <= 0.1 * fit["ic0_stderr_A"]
    assert "Dynes" in methods and "reconstructed" in methods
    assert "Ambegaokar" in methods and "voltage map" in methods
    assert "References\n[1]" in methods


def test_reruns_are_byte_identical_but_for_the_timestamp(tmp_path):
    out = tmp_path / "again"
    argv = ["report", demo_files()["kt14_j03.csv"], "--out", str(out), "--loss", "cauchy",
            "--figures", "png,pdf,svg"]
    assert main(argv) == 0
    first = {p: (out / p).read_bytes() for p in os.listdir(out)}
    assert main(argv) == 0
    second = {p: (out / p).read_bytes() for p in os.listdir(out)}
    assert first.keys() == second.keys()
    for name in first:
        a, b = first[name], second[name]
        if name in ("result.json", "report.html"):
            stamp = rb'"?generated_utc"?: "[^"]*"|Generated [0-9TZ:-]+'
            a, b = re.sub(stamp, b"", a), re.sub(stamp, b"", b)
        assert a == b, name
    prov = json.loads((out / "provenance.json").read_text())
    assert prov["command"].startswith("jjpattern report ")
    assert prov["input_sha256"] == json.loads((out / "result.json").read_text())[
        "input"]["sha256"]


def test_user_strings_are_escaped(tmp_path):
    b = np.linspace(-3, 3, 121)
    rows = "\n".join(f"{x:.4f},{10 * abs(np.sinc(x)) + 0.01 * np.cos(7 * x):.5f}" for x in b)
    src = tmp_path / "evil.csv"
    src.write_text("# junction: <script>alert(1)</script>\n# chip: a&b \"quoted\"\n"
                   "B (mT),Ic (uA)\n" + rows + "\n")
    assert main(["analyze", str(src), "--report", str(tmp_path / "r")]) == 0
    page = (tmp_path / "r" / "report.html").read_text()
    assert "<script>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "a&amp;b &quot;quoted&quot;" in page
    assert _parse(tmp_path / "r" / "report.html").scripts == 0
