"""Reads YAML result files (safe loading only, with the line of every field and point)."""

from __future__ import annotations

import datetime as dt
import re
from pathlib import Path
from typing import Any

import yaml
from loopledger.contracts import ResultRead
from loopledger.findings import Finding, error
from loopledger.hookspecs import hookimpl
from loopledger.load import HEADER_FIELDS, POINT_FIELDS
from loopledger.plugins.read.blank import not_filled_in
from loopledger.spelling import unknown
from loopledger.textio import AliasBomb, DuplicateKey, TooManyNodes, compose, count_nodes, decode, key_lines, node_line

PHASES = ("as_found", "as_left")
_SPLIT_NUMBER = re.compile(r"^\d+(\s*\S+)?$")
INSTRUMENT_ROLES = ("source", "meter", "shunt", "cjc_probe")
#: the header fields written at the top level of a YAML file (the instruments' ids go under ``instruments``)
HEADER_FIELDS_READ = tuple(f for f in HEADER_FIELDS if f not in INSTRUMENT_ROLES)
_SCALAR = (str, int, float, dt.date)


def parse(text: str, rel: str) -> ResultRead:
    findings: list[Finding] = []
    try:
        doc, node = compose(text)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        line = int(mark.line) + 1 if mark is not None else 0
        problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        return ResultRead({}, [], findings=[error(f"YAML cannot be read: {problem}", file=rel, line=line,
                                                  code="yaml")])
    except AliasBomb as exc:
        return ResultRead({}, [], findings=[error(str(exc), file=rel, code="yaml-alias")])
    except DuplicateKey as exc:
        return ResultRead({}, [], findings=[error(str(exc), file=rel, line=exc.line, code="yaml-duplicate")])
    except ValueError as exc:  # e.g. an explicit !!timestamp that is not a date
        return ResultRead({}, [], findings=[error(f"YAML value cannot be read: {exc}", file=rel, code="yaml")])
    if not isinstance(doc, dict) or node is None:
        return ResultRead({}, [], findings=[error("expected a mapping of test fields (asset, date, ...)",
                                                  file=rel, line=1, code="yaml")])
    lines = key_lines(node)
    header: dict[str, Any] = {}
    header_lines: dict[str, int] = {}
    for key, value in doc.items():
        key = str(key)
        line = lines.get(key, (0, None))[0]
        if key in PHASES:
            continue
        if key == "instruments":
            if not isinstance(value, dict):
                findings.append(error("expected a mapping such as {source: ID, meter: ID, shunt: ID}",
                                      file=rel, line=line, field=key))
                continue
            inner = key_lines(lines[key][1])
            for role, ident in value.items():
                role = str(role)
                if role not in INSTRUMENT_ROLES:
                    findings.append(error(unknown("instrument role", role, INSTRUMENT_ROLES), file=rel,
                                          line=inner.get(role, (line, None))[0], field=f"instruments.{role}"))
                elif not isinstance(ident, str | int):
                    findings.append(error("expected an instrument id", file=rel, field=f"instruments.{role}",
                                          line=inner.get(role, (line, None))[0]))
                else:
                    header[role] = str(ident)
                    header_lines[role] = inner.get(role, (line, None))[0]
            continue
        if key not in HEADER_FIELDS:
            findings.append(error(unknown("field", key, (*HEADER_FIELDS_READ, *PHASES, "instruments")), file=rel,
                                  line=line, field=key, code="unknown-key"))
            continue
        if value is not None and not isinstance(value, _SCALAR):
            findings.append(error(f"expected a single value, got a {type(value).__name__}", file=rel,
                                  line=line, field=key))
            continue
        header[key] = value
        header_lines[key] = line
    points: list[dict[str, Any]] = []
    for phase in PHASES:
        if phase not in doc or doc[phase] is None:
            continue
        line, seq = lines[phase]
        items = doc[phase]
        if not isinstance(items, list) or not isinstance(seq, yaml.SequenceNode):
            findings.append(error("expected a list of points", file=rel, line=line, field=phase))
            continue
        for number, (item, item_node) in enumerate(zip(items, seq.value, strict=True), start=1):
            points.append(_point(item, item_node, phase, number, rel, findings))
    return ResultRead(header, points, header_lines=header_lines, findings=findings)


def _point(item: Any, node: yaml.Node, phase: str, number: int, rel: str,
           findings: list[Finding]) -> dict[str, Any]:
    line = node_line(node)
    where = {"file": rel, "line": line, "point": f"{phase} #{number}"}
    point: dict[str, Any] = {"line": line, "phase": phase, "point": number}
    if not isinstance(item, dict):
        findings.append(error("expected a point such as {input: 25 %, reading: 8.002 mA}", **where))
        return point
    at = key_lines(node)
    for key, value in item.items():
        key = str(key)
        if key not in POINT_FIELDS:
            if _SPLIT_NUMBER.match(key) and value is None:
                # `{reading: 12,010 mA}`: YAML's flow syntax split a decimal comma into two fields
                findings.append(error(f"'{key}' looks like the rest of a number split at a comma: in "
                                      "{...} a comma separates fields, so a decimal comma cannot be read; "
                                      "write a decimal point (e.g. 12.010 mA)", field="reading", **where))
            else:
                findings.append(error(unknown("point field", key, POINT_FIELDS), field=key, code="unknown-key",
                                      **{**where, "line": at.get(key, (line, None))[0]}))
        elif key == "readings":
            if not isinstance(value, list) or not all(isinstance(v, str | int | float) for v in value):
                findings.append(error("expected a list of readings with units", field=key, **where))
            else:
                point[key] = tuple(value)
        elif value is not None and not isinstance(value, str | int | float):
            findings.append(error(f"expected a single value, got a {type(value).__name__}", field=key, **where))
        else:
            point[key] = value
    return point


def node_budget(limits: dict[str, int] | None) -> int:
    """The most YAML values a result file within the limits can hold: each point a mapping of its fields
    (two values each) and up to ``max_repeats`` readings, plus a header's worth."""
    from loopledger.config import DEFAULTS

    limits = {**DEFAULTS["limits"], **(limits or {})}
    return 200 + int(limits["max_points"]) * (1 + 2 * len(POINT_FIELDS) + int(limits["max_repeats"]))


@hookimpl
def ll_read_result(path: Path, rel: str, data: bytes, limits: dict[str, int] | None = None) -> ResultRead | None:
    if path.suffix.lower() not in (".yaml", ".yml"):
        return None
    try:
        text = decode(data)
    except ValueError as exc:
        return ResultRead({}, [], findings=[error(str(exc), file=rel, code="encoding")])
    try:  # counted before anything is built: a file under the byte limit can hold a million points
        count_nodes(text, node_budget(limits))
    except TooManyNodes as exc:
        return ResultRead({}, [], findings=[error(
            f"the file holds {exc}, more than points within limits.max_points, each with up to "
            "limits.max_repeats readings, could need; it is not read further", file=rel, code="too-many")])
    return not_filled_in(parse(text, rel), rel)
