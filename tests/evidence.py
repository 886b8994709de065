"""Builders of small evidence folders for tests (invented data, never evidence)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import yaml

ASSET_COLUMNS = [
    "asset", "description", "site", "area", "signal", "input_min", "input_max", "input_unit", "output_min",
    "output_max", "output_unit", "characteristic", "accuracy", "ct_ratio", "display_min", "display_max",
    "display_unit", "max_load_ohm", "power", "supply_v", "min_terminal_v", "receiver_ohm", "cable_mm2",
    "cable_awg", "cable_length_m", "interval_months",
]

#: a current transducer 0-1 A -> 4-20 mA behind a 2000/1 A current transformer, class 0.5
CT_ASSET: dict[str, Any] = {
    "asset": "T-CT1", "description": "Test current transducer", "site": "Test site", "area": "Panel 1",
    "signal": "current-transducer", "input_min": 0, "input_max": 1, "input_unit": "A", "output_min": 4,
    "output_max": 20, "output_unit": "mA", "characteristic": "linear", "accuracy": "0.5", "ct_ratio": "2000/1",
    "display_min": 0, "display_max": 2000, "display_unit": "A", "max_load_ohm": 750, "power": "self",
    "receiver_ohm": 250, "cable_mm2": 1.5, "cable_length_m": 50, "interval_months": 12,
}

INSTRUMENTS: dict[str, Any] = {
    # a calibrator-grade source, so that the fixture rig's TUR is above 4:1 (no low-TUR warning)
    "SRC-1": {"kind": "source", "range": "5 A", "accuracy": "0.02 %rdg + 0.005 %range",
              "calibrated": "2026-01-01", "due": "2027-01-01"},
    "DMM-1": {"kind": "meter", "calibrated": "2026-01-01", "due": "2027-01-01", "ranges": [
        {"range": "20 mA", "accuracy": "0.05 %rdg + 2 digits", "resolution": "0.001 mA", "burden": "1.8 mV/mA"},
        {"range": "2 V", "accuracy": "0.05 %rdg + 2 digits", "resolution": "0.0001 V"},
        {"range": "20 V", "accuracy": "0.05 %rdg + 2 digits", "resolution": "0.001 V"}]},
    "SH-100": {"kind": "shunt", "resistance": "100 ohm", "tolerance": "0.01 %", "tempco": "5 ppm/K",
               "reference_temperature": "23 degC", "calibrated": "2026-01-01", "due": "2027-01-01"},
}

#: a primary injection set, for tests that inject primary amps through the CT (a secondary set's 5 A range
#: does not cover them, and the source-range check says so)
PRIMARY_SOURCE: dict[str, Any] = {"kind": "source", "range": "5000 A", "accuracy": "0.1 %rdg + 0.02 %range",
                                  "calibrated": "2026-01-01", "due": "2027-01-01"}
WITH_PRIMARY: dict[str, Any] = {**INSTRUMENTS, "PRI-1": PRIMARY_SOURCE}
PRIMARY_RIG: dict[str, Any] = {"instruments": {"source": "PRI-1", "meter": "DMM-1"}}


def result_yaml(asset: str = "T-CT1", date: str = "2026-04-14", method: str = "direct",
                as_found: list[tuple[str, str]] | None = None, as_left: list[tuple[str, str]] | None = None,
                **header: Any) -> str:
    """A result file in YAML; points are (input, reading) pairs."""
    doc: dict[str, Any] = {"asset": asset, "date": date, "technician": "T. Tester", "connection": "standalone",
                           "method": method, "injection": "secondary", "ambient_c": 23.0,
                           "instruments": {"source": "SRC-1", "meter": "DMM-1"}}
    if method == "shunt":
        doc["instruments"]["shunt"] = "SH-100"
    doc.update(header)
    doc["as_found"] = [{"input": i, "reading": r} for i, r in (as_found or [])]
    if as_left:
        doc["as_left"] = [{"input": i, "reading": r} for i, r in as_left]
    return yaml.safe_dump(doc, sort_keys=False)


def write_evidence(root: Path, results: dict[str, str], assets: list[dict[str, Any]] | None = None,
                   instruments: dict[str, Any] | None = None, config: str = 'as_of = 2026-11-30\n') -> Path:
    """Write an evidence folder under ``root`` and return it."""
    root.mkdir(parents=True, exist_ok=True)
    rows = assets if assets is not None else [CT_ASSET]
    columns = ASSET_COLUMNS + [c for c in dict.fromkeys(k for row in rows for k in row) if c not in ASSET_COLUMNS]
    lines = [",".join(columns)]
    for row in rows:
        lines.append(",".join("" if row.get(c) is None else str(row.get(c)) for c in columns))
    (root / "assets.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    (root / "instruments.yaml").write_text(yaml.safe_dump(instruments or INSTRUMENTS, sort_keys=False),
                                           encoding="utf-8")
    (root / "loopledger.toml").write_text(config, encoding="utf-8")
    for rel, text in results.items():
        path = root / "results" / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    return root


def good_points(offset_ma: float = 0.0, shunt: bool = False) -> list[tuple[str, str]]:
    """Five points 0..100 % with a constant offset (mA) on a 4-20 mA output."""
    out = []
    for pct in (0, 25, 50, 75, 100):
        ma = 4 + 16 * pct / 100 + offset_ma
        out.append((f"{pct} %", f"{ma / 10:.5f} V" if shunt else f"{ma:.4f} mA"))
    return out


def blocks(results: list[Any], key: str) -> list[Any]:
    """The sections a batch page hook's answers (one ``{id: sections}`` per plugin) give one page."""
    return [s for found in results for s in (found or {}).get(key, [])]


def batch_and_alone(hook: Any, ctx: Any, ids: list[str], arg: str = "tests") -> dict[str, Any]:
    """Ask a batch page hook for ``ids`` together, then for each alone; return the batch answer.

    Asserts that every page gets the same sections either way (a hook working over the rows of a whole
    batch must not mix one page's rows into another's), that no page outside the batch is answered, and
    that an empty batch gets nothing.
    """
    together = hook(ctx=ctx, **{arg: ids})
    assert set(together) <= set(ids)
    for key in ids:
        assert together.get(key, []) == hook(ctx=ctx, **{arg: [key]}).get(key, []), key
    assert hook(ctx=ctx, **{arg: []}) == {}
    return together
