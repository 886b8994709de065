"""The drift chart on an asset page: one mark per result, placed on the right side of the MPE line.

Plumbing checks on invented data: a dot drawn above the +MPE line must be a point the judge stage
failed (|error| > MPE, simple acceptance, ILAC-G8:2019 §4.2.1), and every other dot below it.
"""

from __future__ import annotations

import re

from loopledger.cli import main

from tests.evidence import good_points, result_yaml, write_evidence

OFFSETS = [("2022-03-01", 0.020, None), ("2023-03-01", 0.050, None), ("2024-03-01", 0.090, 0.005),
           ("2025-03-01", 0.030, None)]


def _evidence(tmp_path):
    return write_evidence(tmp_path / "ev", {
        f"{d}.yaml": result_yaml(date=d, as_found=good_points(f),
                                 as_left=good_points(left) if left is not None else None)
        for d, f, left in OFFSETS})


def _svg(page: str) -> str:
    match = re.search(r"<svg.*?</svg>", page, re.S)
    assert match, "no chart on the asset page"
    return match.group(0)


def test_chart_marks_and_mpe_line(tmp_path):
    ev = _evidence(tmp_path)
    assert main(["run", str(ev), "--out", str(tmp_path / "out"), "--as-of", "2025-06-01"]) == 0
    svg = _svg((tmp_path / "out" / "handbook" / "assets" / "T-CT1.html").read_text(encoding="utf-8"))
    dots = [float(y) for y in re.findall(r'<circle cx="[\d.]+" cy="([\d.]+)"', svg)]
    squares = re.findall(r"<rect ", svg)
    assert len(dots) == 4 and len(squares) == 1  # four as-found results, one as-left
    mpe_lines = [float(y) for y in re.findall(r'<line x1="[\d.]+" y1="([\d.]+)"[^>]*stroke="#b22"', svg)]
    upper = min(mpe_lines)
    # 0.090 mA of a 0.08 mA MPE failed as found in 2024; the other as-found errors passed
    assert [y < upper for y in dots] == [False, False, True, False]
    # the fitted line restarts at the adjustment: one segment per test
    assert len(re.findall(r'stroke="#36c"', svg)) == 4
