"""Tests of the design comparison (fields.studies.compare, fields.io.compare_page) on the iron-free
suspension test design and a copy with a stronger grade. References are named beside each check."""

from __future__ import annotations

import csv
import json
import math
import re
from html.parser import HTMLParser

import pytest

from fields.errors import InputError
from fields.input import geometry
from fields.input.sweepfile import RESULT_COLUMNS
from fields.studies.compare import run_compare
from fields.studies.evaluate import evaluate_design

from helpers import ROOT

AIR = ROOT / "tests" / "data" / "air_suspension.toml"


@pytest.fixture(scope="module")
def compared(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("compare")
    b = tmp / "air_n52.toml"
    # INVENTED EXAMPLE: the test design with an N52 floater magnet instead of N42
    b.write_text(AIR.read_text().replace('grade = "N42"', 'grade = "N52"')
                 .replace('name = "air-suspension-test"', 'name = "air-n52"'))
    out = tmp / "out"
    r = run_compare([AIR, b], out)
    return r, out, [AIR, b]


def test_csv_numbers_equal_each_designs_own_evaluation(compared):
    r, out, files = compared
    with open(out / "compare.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    assert len(rows) == 2
    for row, path in zip(rows, files):
        own = evaluate_design(geometry.load(path))
        for c in RESULT_COLUMNS:
            v = own[c]
            if isinstance(v, bool):
                assert row[c] == str(v).lower(), c
            elif math.isnan(v):
                assert row[c] in ("", "nan"), c
            else:
                assert float(row[c]) == v, c  # written by repr: exact


def test_stronger_grade_changes_the_hover_current_not_the_stiffness(compared):
    """Air coil, one floater magnet: k_i is proportional to Br and k_z = -I dk_i/dz with I = W/k_i,
    so k_z does not depend on Br (Jackson, Classical Electrodynamics, 3rd ed., 1999, eq. 5.69: the
    force on a magnet is linear in its magnetization); the hover current falls by the grades'
    mid-range ratio (N42 1.30 T, N52 1.455 T in the table)."""
    r, out, _ = compared
    a, b = (d["row"] for d in r.data["designs"])
    assert b["hover_current_A"] / a["hover_current_A"] == pytest.approx(1.30 / 1.455, rel=1e-9)
    assert b["kz_N_per_m"] == pytest.approx(a["kz_N_per_m"], rel=1e-7)
    rel = r.data["designs"][1]["relative_to_first"]
    assert rel["hover_current_A"] == pytest.approx(1.30 / 1.455 - 1.0, rel=1e-9)


class _Nums(HTMLParser):
    def __init__(self):
        super().__init__()
        self.items, self._cur, self.cells, self._td = [], None, [], None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "span" and "data-src" in a:
            self._cur = dict(a, text="")
        if tag == "td":
            self._td = a.get("class", "")

    def handle_data(self, data):
        if self._cur is not None:
            self._cur["text"] += data

    def handle_endtag(self, tag):
        if tag == "span" and self._cur is not None:
            self._cur["td_class"] = self._td
            self.items.append(self._cur)
            self._cur = None


def _resolve(obj, path):
    for part in re.findall(r"[^.\[\]]+|\[\d+\]", path):
        obj = obj[int(part[1:-1])] if part.startswith("[") else obj[part]
    return obj


def test_html_sections_and_every_number_traces_to_compare_json(compared):
    r, out, _ = compared
    html = (out / "compare.html").read_text(encoding="utf-8")
    for title in ("Designs", "Verdicts", "Operating point", "Stiffness and stability", "Coil heat",
                  "Control (vertical loop, PD starting design)", "Axial force curves", "Safety"):
        assert f">{title}</h2>" in html, title
    assert "data:image/png;base64," in html
    data = json.loads((out / "compare.json").read_text())
    p = _Nums()
    p.feed(html)
    assert len(p.items) > 50
    for it in p.items:
        assert it["data-src"] == "compare.json"
        value = _resolve(data, it["data-path"])
        if value is None:
            assert it["data-value"] == "null" and it["text"] == "n/a"
            continue
        assert float(it["data-value"]) == float(value), it
        assert it["text"] == f'{float(value) * float(it["data-scale"]):.{int(it["data-digits"])}g}', it
    # the hover current differs by ~10 % (beyond 5 %): highlighted; k_z equal: not highlighted
    marked = {it["data-path"] for it in p.items if it["td_class"] == "diff"}
    assert "designs[1].row.hover_current_A" in marked
    assert "designs[1].row.kz_N_per_m" not in marked


def test_compare_needs_two_designs(tmp_path):
    from fields.cli import main

    with pytest.raises(InputError, match="two or more"):
        run_compare([AIR], tmp_path)
    assert main(["compare", str(AIR), "-o", str(tmp_path)]) == 2
