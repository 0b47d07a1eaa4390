"""report.html read back with the standard library's HTML parser."""

from __future__ import annotations

import base64
import dataclasses
import io
import json
import re
from html.parser import HTMLParser

from PIL import Image

from divides.assess.verdict import CAUTION
from divides.report import html as report_html

# HTML5 void elements have no end tag (WHATWG HTML standard, "void elements")
VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


class _Page(HTMLParser):
    """Collects text, tags, attributes and checks that elements nest properly."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.text: list[str] = []
        self.tags: list[str] = []
        self.attrs: list[tuple[str, str, str]] = []
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.style = ""
        self._in_style = False

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs += [(tag, k, v or "") for k, v in attrs]
        if tag not in VOID:
            self.stack.append(tag)
        self._in_style = tag == "style"

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1] if self.stack else 'nothing'}")
        else:
            self.stack.pop()
        self._in_style = False

    def handle_data(self, data):
        if self._in_style:
            self.style += data
        else:
            self.text.append(data)


def _parse(text: str) -> _Page:
    page = _Page()
    page.feed(text)
    page.close()
    return page


def _flat(page: _Page) -> str:
    return re.sub(r"\s+", " ", "".join(page.text))


def test_report_is_well_formed_and_self_contained(written) -> None:
    result, out, _ = written
    text = (out / "report.html").read_text(encoding="utf-8")
    assert text.lstrip().lower().startswith("<!doctype html>")
    page = _parse(text)
    assert page.errors == [] and page.stack == []
    # opens offline: no scripts, no linked resources, no network URLs anywhere in attributes or CSS
    assert "script" not in page.tags and "link" not in page.tags and "iframe" not in page.tags
    for tag, name, value in page.attrs:
        assert not re.match(r"\s*(https?:)?//", value, re.I), (tag, name, value)
    assert "url(" not in page.style


def test_report_carries_the_verdict_and_the_caution(written) -> None:
    result, out, _ = written
    flat = _flat(_parse((out / "report.html").read_text(encoding="utf-8")))
    assert result.verdict.text.splitlines()[0] in flat
    assert CAUTION in flat
    for c in result.contrasts:  # the evidence table names every measure
        assert c.metric.replace("_", " ") in flat
    for ref in ("Willett", "Forte", "Scherler", "Perron", "Hergarten", "Mudd", "Barnes", "He, C."):
        assert ref in flat
    assert "theta_used" in flat and "channel_area_used_m2" in flat  # automatic parameters are listed


def test_report_embeds_every_figure_as_png(written) -> None:
    _, out, _ = written
    page = _parse((out / "report.html").read_text(encoding="utf-8"))
    sources = [v for tag, k, v in page.attrs if tag == "img" and k == "src"]
    assert len(sources) == len(list((out / "figures").glob("*.png")))
    for src in sources:
        head, _, data = src.partition(",")
        assert head == "data:image/png;base64"  # RFC 2397 data URI
        with Image.open(io.BytesIO(base64.b64decode(data, validate=True))) as img:
            assert img.format == "PNG" and min(img.size) >= 300
    alts = [v for tag, k, v in page.attrs if tag == "img" and k == "alt"]
    assert len(alts) == len(sources) and all(alts)


def test_text_from_inputs_is_escaped(demo_result) -> None:
    # no "/" or "\\" in it: outputs name the DEM by its file name, so a separator would cut the name short
    nasty = "<script>alert('x') & \"quoted\" <img src=x onerror=alert(1)>.tif"
    pages = {}
    for path in (nasty, "plain.tif"):
        result = dataclasses.replace(demo_result, dem=dataclasses.replace(demo_result.dem, path=path))
        pages[path] = _parse(report_html.render_report(result, {}))
    page = pages[nasty]
    assert page.tags == pages["plain.tif"].tags  # the path added no element
    assert nasty in _flat(page)  # shown literally, as text
    assert page.errors == [] and page.stack == []


def test_robustness_runs_are_tabulated(demo_result) -> None:
    runs = [{"change": "θ = 0.35 <x>", "moves_toward": "b", "kept": True},
            {"change": "channel area × 2", "moves_toward": "stable", "kept": False}]
    result = dataclasses.replace(demo_result, robustness=runs)
    flat = _flat(_parse(report_html.render_report(result, {})))
    assert "θ = 0.35 <x>" in flat and "channel area × 2" in flat


def test_parameters_are_named_in_words_with_units(written) -> None:
    result, out, _ = written
    page = (out / "report.html").read_text(encoding="utf-8")
    section = page[page.index('id="parameters"'):page.index('id="data"')]
    rows = re.findall(r"<tr><td>(.*?)</td><td class=\"n\">(.*?)</td><td>(.*?)</td><td><code>(.*?)</code></td></tr>",
                      section)
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert sorted(r[3] for r in rows) == sorted(summary["parameters"])  # every parameter, once
    for name, _value, unit, key in rows:
        assert "_" not in name, name  # a plain name, not the key
        # SI unit symbols (BIPM SI brochure): areas in m², lengths in m
        if key.endswith("_m2"):
            assert unit == "m²", key
        elif key.endswith("_m"):
            assert unit == "m", key
    words = {r[3]: r[0] for r in rows}
    assert words["a0_m2"].startswith("Reference drainage area") and words["n_bootstrap"].startswith("Bootstrap")
    # the conditioning is a sentence, not a Python dictionary
    data = page[page.index('id="data"'):]
    assert "{" not in data.split("Conditioning", 1)[1].split("</tr>", 1)[0]


def test_ksn_card_has_its_unit(written) -> None:
    _, out, _ = written
    page = (out / "report.html").read_text(encoding="utf-8")
    # ksn = S A^θ with A in m² and S in m/m: m^(2θ) (Wobus et al. 2006 normalise by a reference concavity)
    assert re.search(r"Median ksn a / b \(m\^0\.9", page)
