"""End to end over a temporary evidence folder (the API, not the CLI)."""

from __future__ import annotations

from tests.evidence import good_points, result_yaml, write_evidence


def test_a_good_direct_test_passes(tmp_path, run_folder):
    ev = write_evidence(tmp_path / "ev", {"a.yaml": result_yaml(as_found=good_points(0.01))})
    ctx = run_folder(ev)
    assert ctx.findings == []
    assert list(ctx.tests["verdict"]) == ["pass"]
    assert ctx.points["error"].round(6).eq(0.01).all()


def test_stamping_a_stage_keeps_every_other_field():
    """The runner names the stage of each finding without losing any field (if Finding grows a field,
    this fails until the stamp copies it)."""
    from dataclasses import asdict, fields

    from loopledger.findings import Finding
    from loopledger.runner import _stamp

    values = {f.name: f"x-{f.name}" if f.type in ("str", str) else 7 for f in fields(Finding)}
    values.update(severity="warning", stage="")
    [stamped] = _stamp([Finding(**values)], "judge")
    assert asdict(stamped) == {**values, "stage": "judge"}
    kept = Finding("error", "m", stage="check")
    assert _stamp([kept], "judge") == [kept]
