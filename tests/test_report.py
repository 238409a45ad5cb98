"""The HTML report: self-contained, sectioned, escaped, with the caution at top and bottom.

The document is read back with the standard library's HTML parser (an implementation
independent of the report's writer) and its images with the PNG signature of the PNG
specification (ISO/IEC 15948: bytes 89 50 4E 47 0D 0A 1A 0A).
"""

from __future__ import annotations

import base64
import datetime as dt
import html
import json
import re
from dataclasses import replace
from html.parser import HTMLParser

import numpy as np
import pytest
import xarray as xr

from tfhrv.analysis.pipeline import ScanOptions
from tfhrv.analysis.policy import DECISION_TABLE
from tfhrv.analysis.windows import LONG
from tfhrv.circadian.days import CircadianOptions, circadian_dataset, circadian_table
from tfhrv.core.caution import CAUTION
from tfhrv.dataset.build import scan
from tfhrv.signal.clean import clean
from tfhrv.synth import simulate_recording
from tfhrv.viz.report import SECTIONS, build_report, write_report

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


class Collector(HTMLParser):
    """Tags, attributes and text of a document."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []
        self.open_sections: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)


def parse(doc: str) -> Collector:
    c = Collector()
    c.feed(doc)
    c.close()
    return c


@pytest.fixture(scope="module")
def tree() -> xr.DataTree:
    """A 9-h evening/night synthetic record with its /circadian group, scanned once."""
    sim = simulate_recording(days=0.375, start=dt.datetime(2024, 3, 4, 18, 0), rng=2,
                             record_id="report-test")
    t = scan(clean(sim.recording), options=ScanOptions(long=replace(LONG, hop_s=7200.0)))
    opt = CircadianOptions(n_boot=99)
    t["/circadian"] = xr.DataTree(circadian_dataset(circadian_table(t, options=opt), opt))
    return t


@pytest.fixture(scope="module")
def doc(tree) -> str:
    return build_report(tree, dpi=40)


def test_sections_present_in_order(doc):
    ids = [a["id"] for _, a in parse(doc).tags if "id" in a]
    assert [i for i in ids if i in SECTIONS] == list(SECTIONS)


def test_no_external_reference_or_script(doc):
    # the embedded images' base64 payloads are left out: read case-blind, any four of their
    # letters can spell "http" (about once per megabyte of base64)
    low = re.sub(r"base64,[a-z0-9+/=]+", "base64,", doc.lower())
    for bad in ("http", "src=\"http", "<script", "<link", "<iframe", "url(", "@import",
                "javascript:", "//cdn"):
        assert bad not in low, bad
    for tag, attrs in parse(doc).tags:
        assert tag not in ("script", "link", "iframe", "object", "embed")
        if "href" in attrs:
            assert attrs["href"].startswith("#"), attrs
        if "src" in attrs:
            assert attrs["src"].startswith("data:image/png;base64,"), attrs["src"][:40]


def test_every_image_is_an_embedded_png(doc):
    imgs = [a for t, a in parse(doc).tags if t == "img"]
    assert len(imgs) == 9  # eight figures and the multifractal spectrum (issue #20)
    for a in imgs:
        data = base64.b64decode(a["src"].split(",", 1)[1], validate=True)
        assert data[:8] == PNG_SIGNATURE
        assert a.get("alt")


def test_caution_at_top_and_bottom(doc):
    c = parse(doc)
    top = next(a for _, a in c.tags if a.get("id") == "caution-top")
    assert "caution" in top["class"]
    assert doc.count(html.escape(CAUTION)) >= 2
    assert doc.index("caution-top") < doc.index("id=\"summary\"") < doc.index("caution-bottom")
    assert "not for diagnosis" in CAUTION


def test_literature_ranges_are_context_only(doc):
    text = " ".join(parse(doc).text)
    assert "context only" in text
    assert "not a verdict on this person" in text
    for cite in ("Peng et al. 1995", "Huikuri et al. 1998", "Huikuri et al. 2000"):
        assert cite in text


def test_verdict_and_decision_table_from_the_tree(tree, doc):
    rec = tree["record"].to_dataset()
    text = " ".join(parse(doc).text)
    assert rec.attrs["verdict"] in text
    va = rec["verdict"].attrs
    for reason in json.loads(va["reasons"]) + json.loads(va["cautions"]):
        assert reason in text
    assert va["recommended_estimator"] in text
    for category, rule in DECISION_TABLE.items():
        assert category in text and rule.reason in text
    assert f"{float(rec['nn_sd_ms']):.1f} ms" in text
    assert f"{float(rec['alpha1']):.2f}" in text
    if np.isfinite(float(rec["level_effect"])):  # the measured effect is stated (issue 15)
        assert f"{float(rec['level_effect']):+.2f}" in text and "Measured effect" in text


def test_circadian_table_rows(tree, doc):
    text = " ".join(parse(doc).text)
    assert "alpha1 (short)" in text and "nn_mean_ms (short)" in text
    assert "Day and night from" in text


def test_text_from_files_is_escaped(tree):
    evil = "<script>alert('x')</script> & <b>"
    t = tree.copy()
    t.attrs = {**tree.attrs, "record_id": evil, "source_file": evil}
    rec = tree["record"].to_dataset().copy(deep=True)
    rec["verdict"].attrs["reasons"] = json.dumps([evil])
    t["record"] = xr.DataTree(rec)
    out = build_report(t, dpi=20)
    assert "<script>" not in out and "<b>" not in out
    assert html.escape(evil) in out
    assert evil in " ".join(parse(out).text)


def test_without_circadian_and_clock(tree, tmp_path):
    t = tree.copy()
    del t["circadian"]
    for tier in ("short", "long"):
        ds = t[tier].to_dataset()
        td = (ds["elapsed"].values * 1e3).astype("int64").astype("timedelta64[ms]")
        t[tier] = xr.DataTree(ds.drop_vars("clock_hour").assign_coords(time=("time", td)))
    t.attrs = {**tree.attrs, "clock": "unknown", "start": ""}
    path = write_report(t, tmp_path / "out" / "r.html", dpi=20)
    body = path.read_text(encoding="utf-8")
    assert body.startswith("<!DOCTYPE html>")
    assert "No day/night table" in body
    assert "unknown" in body
    assert not list((tmp_path / "out").glob("*.part"))


def test_methods_name_the_calibration_model_of_the_scan():
    import json

    import xarray as xr

    from tfhrv.viz.report import _CALIBRATION_TEXT, _calibration_model

    def tree(params):
        return xr.DataTree(dataset=xr.Dataset(attrs={"parameters": params}))

    fbm = tree(json.dumps({"scan": {"calibration_model": "fgn-fbm"}}))
    assert _calibration_model(fbm) == "fgn-fbm"
    assert "Brownian motion" in _CALIBRATION_TEXT["fgn-fbm"]
    assert _calibration_model(tree("not json")) == "powerlaw"  # older or damaged files
    assert _calibration_model(tree(json.dumps({"scan": {}}))) == "powerlaw"


def test_forked_figures_give_the_same_document(tree, doc):
    # Reference: the report drawn in this process; drawn by two forked processes it must
    # hold the same bytes except the build time and the creation timestamp.
    import multiprocessing
    import re

    if "fork" not in multiprocessing.get_all_start_methods():
        pytest.skip("no fork start method")
    other = build_report(tree, dpi=40, workers=2)

    def strip(d):
        d = re.sub(r"report built [^<]*<", "report built <", d)
        return re.sub(r"[Bb]uilt in [0-9.]+ s", "built in s", d)

    assert strip(other) == strip(doc)
    assert len(re.findall("data:image/png;base64", other)) == 9
