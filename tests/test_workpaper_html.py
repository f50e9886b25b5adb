"""The HTML report: self-contained, offline, user text escaped, the engine's numbers.

The report is parsed with the standard library's html.parser. The
engagement is the hostile one of ``workpaper_helpers``; the report (about
5 MB with plotly.js) is written once for the module. Numbers are checked
against the saved evaluation record and ``auditmean.evaluate`` called
directly, the embedded plotly.js against ``plotly.offline.get_plotlyjs()``,
and a picture's counts against numpy on the ledger.
"""

from __future__ import annotations

import base64
import hashlib
import json
import re
from collections import Counter
from html.parser import HTMLParser

import numpy as np
import pytest
from plotly.offline import get_plotlyjs

import auditmean
from auditmean._records import format_number
from auditmean.cautions import CAUTIONS
from auditmean.workflow import strata_table
from auditmean.workpaper import write_html_report
from auditmean.workpaper.report_html import SCRIPT_ATTRIBUTE

from .workpaper_helpers import HOSTILE_IDS, HOSTILE_NOTES, PURPOSE, SEED, build_hostile_engagement

_REMOTE = re.compile(r"^\s*(https?:|//|ftp:|file:|data:text/html)", re.IGNORECASE)
_URL_ATTRIBUTES = {"src", "href", "action", "formaction", "data", "poster", "srcset", "background", "xlink:href"}


class _Report(HTMLParser):
    """Collects tags, attributes, scripts, text and tables."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.scripts: list[tuple[dict[str, str | None], str]] = []
        self.text: list[str] = []
        self.tables: list[dict] = []
        self._script: dict | None = None
        self._script_text: list[str] = []
        self._stack: list[dict] = []
        self._cell: dict | None = None
        self._in_caption = False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        self.tags.append((tag, a))
        if tag == "script":
            self._script, self._script_text = a, []
        elif tag == "table":
            self._stack.append({"caption": "", "rows": []})
        elif tag == "caption":
            self._in_caption = True
        elif tag == "tr" and self._stack:
            self._stack[-1]["rows"].append([])
        elif tag in ("td", "th") and self._stack:
            self._cell = {"text": "", "value": a.get("data-value")}

    def handle_endtag(self, tag):
        if tag == "script" and self._script is not None:
            self.scripts.append((self._script, "".join(self._script_text)))
            self._script = None
        elif tag == "caption":
            self._in_caption = False
        elif tag in ("td", "th") and self._cell is not None and self._stack:
            self._stack[-1]["rows"][-1].append(self._cell)
            self._cell = None
        elif tag == "table" and self._stack:
            self.tables.append(self._stack.pop())

    def handle_data(self, data):
        if self._script is not None:
            self._script_text.append(data)
            return
        self.text.append(data)
        if self._in_caption and self._stack:
            self._stack[-1]["caption"] += data
        elif self._cell is not None:
            self._cell["text"] += data


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    root = tmp_path_factory.mktemp("wp-html")
    made = build_hostile_engagement(root)
    path = write_html_report(made["folder"], root / "workpaper.html", purpose=PURPOSE)
    made["html"] = path.read_text(encoding="utf-8")
    parser = _Report()
    parser.feed(made["html"])
    parser.close()
    made["parsed"] = parser
    return made


def _table(parsed: _Report, caption_start: str) -> list[list[dict]]:
    for t in parsed.tables:
        if t["caption"].startswith(caption_start):
            return t["rows"]
    raise AssertionError(f"no table with caption starting {caption_start!r}")


def test_only_our_scripts(report):
    p = report["parsed"]
    roles = [a.get(SCRIPT_ATTRIBUTE) for a, _ in p.scripts]
    assert set(roles) <= {"plotly-bundle", "figure", "print"}
    assert roles.count("plotly-bundle") == 1 and roles.count("print") == 1
    figure_divs = [a["id"] for t, a in p.tags if t == "div" and "am-figure" in (a.get("class") or "")]
    targets = [a.get("data-target") for a, _ in p.scripts if a.get(SCRIPT_ATTRIBUTE) == "figure"]
    assert targets == figure_divs and len(targets) >= 6  # 4 pictures of the work, 2 of the coverage check
    assert all("src" not in a for a, _ in p.scripts)
    bundle = next(text for a, text in p.scripts if a.get(SCRIPT_ATTRIBUTE) == "plotly-bundle")
    assert bundle == get_plotlyjs()  # plotly.js embedded whole ...
    assert report["html"].count(get_plotlyjs()[:60]) == 1  # ... and once


def test_nothing_is_fetched(report):
    p = report["parsed"]
    for tag, attrs in p.tags:
        assert tag not in ("iframe", "object", "embed", "link", "base", "form", "img", "audio", "video")
        for name, value in attrs.items():
            if name in _URL_ATTRIBUTES and value is not None:
                assert not _REMOTE.match(value), (tag, name, value)
                if name == "href":
                    assert value.startswith("#"), value
    styles = "".join(t for t in re.findall(r"<style>(.*?)</style>", report["html"], re.S))
    assert "@import" not in styles and "url(" not in styles
    csp = next(a["content"] for t, a in p.tags if t == "meta" and a.get("http-equiv") == "Content-Security-Policy")
    assert "default-src 'none'" in csp and "connect-src 'none'" in csp


def test_only_the_reports_own_scripts_may_run(report):
    p = report["parsed"]
    csp = next(a["content"] for t, a in p.tags if t == "meta" and a.get("http-equiv") == "Content-Security-Policy")
    script_src = next(d for d in csp.split(";") if d.strip().startswith("script-src")).split()[1:]
    # each script's hash, by hashlib, is listed; nothing else is allowed (no 'unsafe-inline')
    hashes = {
        "'sha256-" + base64.b64encode(hashlib.sha256(body.encode("utf-8")).digest()).decode() + "'"
        for _, body in p.scripts
    }
    assert set(script_src) == hashes


def test_user_text_is_text_never_markup(report):
    p = report["parsed"]
    text = "".join(p.text)
    for item in HOSTILE_IDS:
        assert item in text  # shown, as text
    for note in HOSTILE_NOTES:
        if "\x07" in note:
            assert note.replace("\x07", "\u2407") in text
        else:  # a browser reads CR as a line end (HTML normalises CR to LF), as does read_text
            assert note.replace("\r", "\n") in text
    assert PURPOSE in text
    assert "<img src=x onerror=alert(2)>" in text  # the folder's name, shown as text
    for tag, attrs in p.tags:
        assert not any(name.startswith("on") for name in attrs), (tag, attrs)
        assert tag not in ("b", "u", "i")  # no tag from the user's texts or file names
    for attrs, body in p.scripts:
        if attrs.get(SCRIPT_ATTRIBUTE) != "plotly-bundle":
            assert "<" not in body and "alert(" not in body


def test_cautions_and_warnings_come_first(report):
    text = "".join(report["parsed"].text)
    first = text.index(CAUTIONS[0])
    assert all(text.index(c) < text.index("Purpose") for c in CAUTIONS)
    assert first < text.index("Warnings raised") < text.index("The population")
    assert text.index("Warnings for the relied-on method") < text.index("Purpose")
    saved = report["saved"]["evaluation"]
    expected = Counter(f["code"] for f in saved["estimates"][saved["primary"]]["flags"])
    rows = _table(report["parsed"], "Warnings for the relied-on method")
    assert {r[0]["text"]: int(r[2]["value"]) for r in rows[1:]} == dict(expected)


def test_numbers_are_the_engines(report):
    rows = _table(report["parsed"], "Every estimator side by side")
    header = [c["text"] for c in rows[0]]
    saved = report["saved"]["evaluation"]
    eng, plan = report["engagement"], report["plan"]
    frame = eng.sample_frame().frame
    direct = auditmean.evaluate(
        frame[["stratum", "item_id", "book_value", "audited_value"]], strata_table(plan, eng.plan()["strata"]),
        tolerable=plan.tolerable, expected=plan.expected, risk_incorrect_acceptance=plan.risk_incorrect_acceptance,
        risk_incorrect_rejection=plan.risk_incorrect_rejection, planned_allowance=plan.planned_allowance,
        primary="ratio", seed=SEED, bootstrap_replicates=300,
    )
    names = auditmean.evaluation.estimate.METHOD_NAMES
    by_name = {r[0]["text"]: dict(zip(header, r)) for r in rows[1:]}
    for m, c in saved["conclusions"].items():
        row = by_name[names[m]]
        up = row["upper misstatement limit"]
        assert float(up["value"]) == c["upper_limit"]  # every digit of the saved record
        assert up["text"] == format_number(c["upper_limit"])  # shown rounded to the cent
        assert float(row["estimated audited total"]["value"]) == saved["estimates"][m]["total"]
        assert float(up["value"]) == pytest.approx(direct.conclusions[m].upper_limit, rel=1e-12)
        assert row["the sample"]["text"] == direct.conclusions[m].verdict


def _figure_specs(parsed: _Report) -> list[dict]:
    out = []
    for attrs, body in parsed.scripts:
        if attrs.get(SCRIPT_ATTRIBUTE) == "figure":
            m = re.match(r'\(function\(\)\{var f=(.*);Plotly\.newPlot\("', body, re.S)
            out.append(json.loads(m.group(1)))
    return out


def _values(v) -> list:
    """A figure array: a plain list, or plotly's typed array {"dtype", "bdata" (base64)}."""
    if isinstance(v, dict) and "bdata" in v:
        return np.frombuffer(base64.b64decode(v["bdata"]), dtype=np.dtype(v["dtype"])).tolist()
    return list(v)


def test_pictures_carry_the_numbers(report):
    specs = _figure_specs(report["parsed"])
    titles = [s["layout"]["title"]["text"] for s in specs]
    dist = specs[next(i for i, t in enumerate(titles) if t.startswith("Book values"))]
    positive = int(np.count_nonzero(report["population"].book_values > 0))  # numpy on the ledger
    assert sum(_values(dist["data"][0]["y"])) == positive
    est = specs[next(i for i, t in enumerate(titles) if t.startswith("Audited total by method"))]
    saved = report["saved"]["evaluation"]
    assert _values(est["data"][0]["x"]) == [saved["estimates"][m]["total"] for m in saved["conclusions"]]
    assert any("How often the limits held" in t for t in titles)


def test_printable(report):
    html = report["html"]
    assert "@media print" in html and "@page" in html
    assert "thead { display: table-header-group; }" in html
