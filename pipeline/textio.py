"""Text input shared by the engine and the readers: decoding bytes into text with a clear message, naming a
table's separator when it is not a comma, and composing YAML safely (no tag builds an object, dates stay
text, duplicate keys and alias bombs refused, every key with its line)."""

from __future__ import annotations

import codecs
from typing import Any

import yaml


def decode(data: bytes) -> str:
    """UTF-8 (with or without BOM) or UTF-16 with a BOM; anything else is refused.

    Raises ValueError with a message naming what was found.
    """
    if not data.strip():
        raise ValueError("file is empty")
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        try:
            text = data.decode("utf-16")
        except UnicodeDecodeError as exc:
            raise ValueError(f"UTF-16 file does not decode: {exc.reason} at byte {exc.start}") from exc
    else:
        if b"\x00" in data:
            raise ValueError("file holds NUL bytes: it is binary, or UTF-16 without a byte-order mark; "
                             "save it as UTF-8 text")
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise ValueError(f"not UTF-8 text (byte 0x{data[exc.start]:02x} at offset {exc.start}); "
                             "save the file as UTF-8") from exc
    return text.replace("\r\n", "\n").replace("\r", "\n")



def other_separator(header: list[str]) -> str | None:
    """How to name the separator of a table read as one column that holds ';', a tab or '|' (a sheet saved
    where the list separator is ';', and the decimal mark a comma): "';'", "tabs", "'|'"; None otherwise."""
    if len(header) != 1:
        return None
    sep = next((c for c in ";\t|" if c in header[0]), None)
    return None if sep is None else "tabs" if sep == "\t" else repr(sep)


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



def node_line(node: yaml.Node) -> int:
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
                        raise DuplicateKey(key.value, keys[key.value], node_line(key))
                    keys[key.value] = node_line(key)
                stack.append(value)
        elif isinstance(item, yaml.SequenceNode):
            stack.extend(item.value)


class TooManyNodes(ValueError):
    """A document of more values than a limit allows, found while it is read (before it is built)."""

    def __init__(self, budget: int) -> None:
        super().__init__(f"more than {budget:,} values")
        self.budget = budget


def count_nodes(text: str, budget: int) -> None:
    """Raise :class:`TooManyNodes` once the document's events pass ``budget`` values (scalars, aliases,
    sequences, mappings), reading no further; nothing is built. A syntax error is left to the composer. A
    text too short to hold that many values (each takes at least one character, most a separator too) is
    not read at all."""
    if len(text) <= budget // 2:
        return
    loader = Loader(text)
    counted = (yaml.ScalarEvent, yaml.AliasEvent, yaml.SequenceStartEvent, yaml.MappingStartEvent)
    seen = 0
    try:
        while loader.check_event():
            if isinstance(loader.get_event(), counted):
                seen += 1
                if seen > budget:
                    raise TooManyNodes(budget)
    except yaml.YAMLError:
        return
    finally:
        loader.dispose()


def compose(text: str, max_nodes: int | None = None) -> tuple[Any, yaml.Node | None]:
    """The document built safely, with its node tree (for lines). With ``max_nodes``, a document of more
    values than that is refused (:class:`TooManyNodes`) while its events are read, before any node is
    built: a file under the byte limit can still hold a million points (:func:`count_nodes`)."""
    if max_nodes is not None:
        count_nodes(text, max_nodes)
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
    return {str(k.value): (node_line(k), v) for k, v in node.value if isinstance(k, yaml.ScalarNode)}
