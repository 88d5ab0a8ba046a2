"""report.html and figures/: every animal named, every image present, hostile ids inert, safe names.

Checks of the HTML are made with Python's own html.parser (a general-purpose
reference parser), not by the report's code.  The escaping rules are those of
the HTML standard (WHATWG HTML, "Escaping a string"); the Windows reserved
device names are from Microsoft's "Naming Files, Paths, and Namespaces"
(from memory: CON, PRN, AUX, NUL, COM1-9, LPT1-9).
"""

from __future__ import annotations

import base64
import hashlib
import re
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from report_inputs import make_inputs
from roamstat.config import Config
from roamstat.report import safe_name, safe_names, write_report
from roamstat.report import curves
from roamstat.report.html import SEARCH_JS

HOSTILE = ["<script>alert(1)</script>", '" onerror="x', "<img src=x onerror=alert(2)>", "ELK-01",
           "ünïcode-Ω", "CON"]
WINDOWS_RESERVED = {"con", "prn", "aux", "nul", *(f"com{i}" for i in range(1, 10)), *(f"lpt{i}" for i in range(1, 10))}


class Collector(HTMLParser):
    """Element names, attributes and text as a browser's tokenizer sees them."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags, self.attrs, self.text, self.img_src, self.scripts = [], [], [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs.extend(name for name, _ in attrs)
        if tag == "img":
            self.img_src.append(dict(attrs)["src"])

    def handle_data(self, data):
        if self.tags and self.tags[-1] == "script" and data.strip():
            self.scripts.append(data)
        else:
            self.text.append(data)


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    out = tmp_path_factory.mktemp("report")
    tables, animals, run_info = make_inputs(HOSTILE, heavy_ids={"ELK-01"}, incomplete_ids={"CON"})
    path = write_report(out, tables, animals, run_info, Config())
    parsed = Collector()
    parsed.feed(path.read_text(encoding="utf-8"))
    return out, path, parsed


def test_report_names_every_animal(report):
    _, _, parsed = report
    text = "".join(parsed.text)
    for animal_id in HOSTILE:
        assert animal_id in text, animal_id


def test_every_image_exists_and_is_a_png(report):
    out, _, parsed = report
    assert len(parsed.img_src) >= 5 * 7 + 1  # five complete animals with 7 figures, one with a track only
    for src in parsed.img_src:
        path = (out / src).resolve()
        assert path.parent == (out / "figures").resolve(), src
        assert path.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n", src  # PNG signature (PNG spec, section 5.2)


def test_hostile_ids_appear_only_escaped(report):
    _, path, parsed = report
    raw = path.read_text(encoding="utf-8")
    # A parser sees one script element, the fixed search script, and no event-handler attribute: the ids stayed text.
    assert parsed.tags.count("script") == 1 and parsed.scripts == [SEARCH_JS]
    assert not [a for a in parsed.attrs if a.startswith("on")]
    assert "<script>alert(1)</script>" not in raw
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in raw
    assert '" onerror="x' not in raw
    assert "&quot; onerror=&quot;x" in raw
    assert "<img src=x" not in raw
    # Notes and reasons carry markup too (report_inputs): escaped, not rendered.
    assert "&lt;b&gt;note&lt;/b&gt;" in raw and "&lt;i&gt;unparsable&lt;/i&gt;" in raw


def test_no_external_resources(report):
    _, path, _ = report
    raw = path.read_text(encoding="utf-8")
    assert not re.search(r'(src|href)="(https?:)?//', raw)
    # Scripts: only the fixed search script, allowed by its SHA-256 hash (CSP Level 2, "hash-source").
    digest = base64.b64encode(hashlib.sha256(SEARCH_JS.encode()).digest()).decode()
    assert "Content-Security-Policy" in raw and f"script-src 'sha256-{digest}'" in raw
    assert "unsafe-inline'" not in raw.split("script-src")[1].split('"')[0]
    assert "@media print" in raw and 'name="viewport"' in raw


def test_report_has_overview_quality_methods_and_cautions(report):
    _, _, parsed = report
    text = "".join(parsed.text)
    for heading in ("Deployment overview", "Data quality", "Methods", "Cautions"):
        assert heading in text
    for reference in ("Kareiva", "Turchin", "Clauset", "Myllymäki", "Benjamini", "Bunnefeld", "Mohr", "Worton",
                      "Harris", "Swihart", "Benhamou", "Bjørneraas", "Karney"):
        assert reference in text, reference
    assert "poaching" in text and "permits" in text
    # report_inputs: 3 spike rows per animal (18), one of them relabelled bad_time.
    assert re.search(r"spike\s*out-and-back spike\s*17", text)


def test_masked_report_hides_projections(tmp_path):
    tables, animals, run_info = make_inputs(["A1", "B2"], incomplete_ids={"A1", "B2"})
    path = write_report(tmp_path, tables, animals, run_info, Config(mask_locations=True))
    raw = path.read_text(encoding="utf-8")
    assert "+proj=aeqd" not in raw and "lat_0" not in raw  # the projection centre is a location
    assert "hidden origin" in raw
    unmasked = write_report(tmp_path / "plain", tables, animals, run_info, Config()).read_text(encoding="utf-8")
    assert "+proj=aeqd" in unmasked


def test_empty_tables_and_missing_parts_do_not_crash(tmp_path):
    tables, animals, run_info = make_inputs(["only"], incomplete_ids={"only"})
    for key in ("fits", "null_tests", "residency", "ranges", "fixes", "rejected_xy"):
        tables[key] = pd.DataFrame()
    tables["rejected"] = pd.DataFrame(columns=["animal_id", "reason_code", "reason"])
    path = write_report(tmp_path, tables, animals, {}, Config())
    raw = path.read_text(encoding="utf-8")
    assert "only" in raw and "<img" not in raw


def test_stand_in_density_is_scaled_by_the_tail_share():
    # Density of the power-law stand-in times the share of steps >= xmin (law of total probability).
    tables, animals, _ = make_inputs(["heavy"], heavy_ids={"heavy"})
    data = curves.step_data(animals[0].fitted)
    assert data["log_axes"]
    (_, _, _), (label, x, density) = data["curves"]
    tail = animals[0].fitted.tail
    share = np.mean(data["steps"] >= tail.xmin)
    assert np.allclose(density, share * np.exp(tail.logpdf(x)))
    assert "power_law" in label


# --- safe names -----------------------------------------------------------------

ADVERSARIAL = [
    "../../etc/passwd", "..", ".", "/", "\\\\server\\share", "C:\\Windows", "x" * 100_000, "y" * 100_000,
    "CON", "con", "Con", "NUL", "COM1", "LPT9", "aux.txt", "ELK-01", "elk-01", "ELK 01", "ELK_01", "ELK.01",
    "ünïcode", "unicode", "Ωmega", "鹿-7", "🦌", "", " ", "\x00", "\n", "a/b", "a\\b", "a:b", "a*b?<>|",
]


def test_safe_names_are_distinct_short_and_plain():
    names = [safe_name(a) for a in ADVERSARIAL]
    assert len(set(names)) == len(ADVERSARIAL)  # distinct ids, distinct names (case and punctuation too)
    for name in names:
        assert re.fullmatch(r"[a-z0-9]+(-[a-z0-9]+)*-[0-9a-f]{8}", name), name
        assert len(name) <= 40 + 1 + 8
        assert name.split(".")[0].lower() not in WINDOWS_RESERVED
        assert Path(name).name == name and name not in (".", "..")


def test_safe_name_hash_is_sha256_of_the_exact_id():
    import hashlib  # reference implementation of SHA-256 (FIPS 180-4) in the standard library

    for animal_id in ("ELK-01", "ünïcode", "x" * 100_000):
        assert safe_name(animal_id).endswith("-" + hashlib.sha256(animal_id.encode("utf-8")).hexdigest()[:8])


def test_safe_names_lengthen_the_hash_on_a_clash(monkeypatch):
    import hashlib

    from roamstat.report import slug

    # Digests that agree in their first 8 hex characters: a clash of the short names of "a-b" and "a_b".
    monkeypatch.setattr(slug, "_digest", lambda s: "0" * 8 + hashlib.sha256(s.encode()).hexdigest()[8:])
    assert slug.safe_name("a-b") == slug.safe_name("a_b")
    names = safe_names(["a-b", "a_b", "other"])
    assert len(set(names.values())) == 3
    assert all(len(n.rsplit("-", 1)[1]) == 64 for n in names.values())


def test_hostile_ids_write_figures_only_inside_figures(tmp_path):
    ids = ["../../etc/evil", "x" * 100_000, "CON", "con", "Ωmega", "a/b"]
    tables, animals, run_info = make_inputs(ids, incomplete_ids=set(ids))  # track figures only: fast
    out = tmp_path / "out"
    write_report(out, tables, animals, run_info, Config())
    written = [p for p in tmp_path.rglob("*") if p.is_file()]
    assert all(p.parent in (out, out / "figures") for p in written), written
    stems = {p.name.rsplit("-", 1)[0] for p in (out / "figures").glob("*.png")}
    assert stems == {safe_name(i) for i in ids}
