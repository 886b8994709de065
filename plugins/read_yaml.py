"""Reads YAML result files (safe loading only, with the line of every field and point)."""

from __future__ import annotations

import datetime as dt
import re
from pathlib import Path
from typing import Any

import yaml
from loopledger.contracts import ResultRead
from loopledger.findings import Finding, error, warning
from loopledger.hookspecs import hookimpl
from loopledger.load import HEADER_FIELDS, POINT_FIELDS
from loopledger.plugins._text import decode

try:
    _Base: Any = yaml.CSafeLoader
except AttributeError:  # PyYAML built without libyaml
    _Base = yaml.SafeLoader

_TIMESTAMP = "tag:yaml.org,2002:timestamp"


class Loader(_Base):  # type: ignore[misc,valid-type]
    """Safe loading (no tag builds an object), and dates stay text.

    Plain ``2026-02-30`` is left as a string so the schema check reports an
    impossible date against its field and line instead of the YAML layer
    failing on the whole file.
    """


Loader.yaml_implicit_resolvers = {
    first: [(tag, rx) for tag, rx in resolvers if tag != _TIMESTAMP]
    for first, resolvers in _Base.yaml_implicit_resolvers.items()
}

#: node visits allowed when a document uses anchors (aliases re-visit what they point at)
MAX_NODES = 20_000

PHASES = ("as_found", "as_left")
_SPLIT_NUMBER = re.compile(r"^\d+(\s*\S+)?$")
INSTRUMENT_ROLES = ("source", "meter", "shunt")
_SCALAR = (str, int, float, dt.date)


def _line(node: yaml.Node) -> int:
    return int(node.start_mark.line) + 1


class AliasBomb(ValueError):
    """A document whose aliases expand beyond :data:`MAX_NODES` nodes."""


def _expanded_size(node: yaml.Node, budget: int) -> int:
    """Nodes visited when every alias is expanded, counting up to ``budget`` + 1 (cycles stop there)."""
    seen = 0
    stack = [node]
    while stack:
        seen += 1
        if seen > budget:
            return seen
        item = stack.pop()
        if isinstance(item, yaml.SequenceNode):
            stack.extend(item.value)
        elif isinstance(item, yaml.MappingNode):
            for key, value in item.value:
                stack.append(key)
                stack.append(value)
    return seen


class DuplicateKey(ValueError):
    """A mapping that gives the same key twice (YAML loaders keep the last silently: a second ``reading``
    in a point would replace the first without a word)."""

    def __init__(self, key: str, first: int, again: int) -> None:
        lines = f"line {again}" if first == again else f"lines {first} and {again}"
        super().__init__(f"'{key}' is given twice in one mapping ({lines}): keep the one meant")
        self.line = again


def _no_duplicate_keys(node: yaml.Node) -> None:
    """Raise :class:`DuplicateKey` for the first mapping of ``node`` that repeats a key (aliases are not
    followed: a document with anchors is bounded by :data:`MAX_NODES` first)."""
    stack = [node]
    seen_nodes: set[int] = set()
    while stack:
        item = stack.pop()
        if id(item) in seen_nodes:
            continue
        seen_nodes.add(id(item))
        if isinstance(item, yaml.MappingNode):
            keys: dict[str, int] = {}
            for key, value in item.value:
                if isinstance(key, yaml.ScalarNode) and key.tag != "tag:yaml.org,2002:merge":
                    if key.value in keys:
                        raise DuplicateKey(key.value, keys[key.value], _line(key))
                    keys[key.value] = _line(key)
                stack.append(value)
        elif isinstance(item, yaml.SequenceNode):
            stack.extend(item.value)


def compose(text: str) -> tuple[Any, yaml.Node | None]:
    loader = Loader(text)
    try:
        node = loader.get_single_node()
        if node is not None and "&" in text and _expanded_size(node, MAX_NODES) > MAX_NODES:
            raise AliasBomb(f"YAML anchors and aliases expand to more than {MAX_NODES:,} values (an alias "
                            "bomb?); write the values out")
        if node is not None:
            _no_duplicate_keys(node)
        return (loader.construct_document(node) if node is not None else None), node
    finally:
        loader.dispose()


def key_lines(node: yaml.Node) -> dict[str, tuple[int, yaml.Node]]:
    if not isinstance(node, yaml.MappingNode):
        return {}
    return {str(k.value): (_line(k), v) for k, v in node.value if isinstance(k, yaml.ScalarNode)}


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
                    findings.append(error(f"unknown instrument role '{role}' (expected one of "
                                          f"{', '.join(INSTRUMENT_ROLES)})", file=rel,
                                          line=inner.get(role, (line, None))[0], field=f"instruments.{role}"))
                elif not isinstance(ident, str | int):
                    findings.append(error("expected an instrument id", file=rel, field=f"instruments.{role}",
                                          line=inner.get(role, (line, None))[0]))
                else:
                    header[role] = str(ident)
                    header_lines[role] = inner.get(role, (line, None))[0]
            continue
        if key not in HEADER_FIELDS:
            findings.append(warning(f"unknown field '{key}' ignored", file=rel, line=line, field=key))
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
    line = _line(node)
    where = {"file": rel, "line": line, "point": f"{phase} #{number}"}
    point: dict[str, Any] = {"line": line, "phase": phase, "point": number}
    if not isinstance(item, dict):
        findings.append(error("expected a point such as {input: 25 %, reading: 8.002 mA}", **where))
        return point
    for key, value in item.items():
        key = str(key)
        if key not in POINT_FIELDS:
            if _SPLIT_NUMBER.match(key) and value is None:
                # `{reading: 12,010 mA}`: YAML's flow syntax split a decimal comma into two fields
                findings.append(error(f"'{key}' looks like the rest of a number split at a comma: in "
                                      "{...} a comma separates fields, so a decimal comma cannot be read; "
                                      "write a decimal point (e.g. 12.010 mA)", field="reading", **where))
            else:
                findings.append(warning(f"unknown point field '{key}' ignored", field=key, **where))
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


@hookimpl
def ll_read_result(path: Path, rel: str, data: bytes) -> ResultRead | None:
    if path.suffix.lower() not in (".yaml", ".yml"):
        return None
    try:
        text = decode(data)
    except ValueError as exc:
        return ResultRead({}, [], findings=[error(str(exc), file=rel, code="encoding")])
    return parse(text, rel)
