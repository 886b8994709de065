"""End to end over a temporary evidence folder (the API, not the CLI)."""

from __future__ import annotations

from tests.evidence import good_points, result_yaml, write_evidence


def test_a_good_direct_test_passes(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.01))})
    ctx = run_folder(ev)
    assert ctx.findings == []
    assert list(ctx.tests["verdict"]) == ["pass"]
    assert ctx.points["error"].round(6).eq(0.01).all()
