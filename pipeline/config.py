"""loopledger.toml: the evidence folder's settings, with defaults."""

from __future__ import annotations

import datetime as dt
import tomllib
from pathlib import Path
from typing import Any

CONFIG_NAME = "loopledger.toml"
#: a loopledger.toml larger than this is refused (a settings file is a few hundred bytes)
MAX_CONFIG_BYTES = 1_000_000

DEFAULTS: dict[str, Any] = {
    "as_of": None,  # date "overdue" is judged on; None means today
    "decision": {"rule": "simple"},
    "limits": {
        "max_file_bytes": 2_000_000,  # a result file larger than this is refused unread
        "max_points": 500,  # per test
        "max_repeats": 100,  # repeat readings per point
        "max_remarks_bytes": 16_000,  # a test's remarks, UTF-8 (the handbook renders them as Markdown)
        "max_register_rows": 200_000,  # rows of assets.csv, entries of instruments.yaml
        "max_register_bytes": 50_000_000,  # assets.csv or instruments.yaml larger than this is refused unread
        "max_unpacked_bytes": 20_000_000,  # an .xlsx whose parts unpack to more than this is refused unopened
    },
}


class ConfigError(Exception):
    """A problem with loopledger.toml or the command line (exit code 3)."""


def _merge(base: dict[str, Any], extra: dict[str, Any]) -> dict[str, Any]:
    out = dict(base)
    for key, value in extra.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = _merge(out[key], value)
        else:
            out[key] = value
    return out


def load_config(evidence: Path, overrides: dict[str, Any] | None = None, follow_links: bool = False) -> dict[str, Any]:
    """Read ``loopledger.toml`` from the evidence folder (if any) over the defaults. A link there is refused
    unless ``follow_links`` (then only one to a file inside the evidence folder), and only a regular file is
    read: the run stops with a ConfigError rather than judge under settings nobody chose."""
    from loopledger.files import LinkRefused, NotRegular, evidence_entry, read_regular

    config = dict(DEFAULTS)
    try:
        path = evidence_entry(evidence, CONFIG_NAME, follow_links)
        data = read_regular(path, MAX_CONFIG_BYTES, f"{CONFIG_NAME} is read up to that size") if path else None
    except (LinkRefused, NotRegular, ValueError, OSError) as exc:
        raise ConfigError(f"{CONFIG_NAME}: {exc}") from exc
    if data is not None:
        try:
            config = _merge(config, tomllib.loads(data.decode("utf-8-sig")))
        except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
            raise ConfigError(f"{CONFIG_NAME}: {exc}") from exc
    if overrides:
        config = _merge(config, overrides)
    limits = config.get("limits")
    if not isinstance(limits, dict):
        raise ConfigError(f"{CONFIG_NAME}: [limits] must be a table")
    for key, value in limits.items():
        if key in DEFAULTS["limits"] and (isinstance(value, bool) or not isinstance(value, int) or value < 1):
            raise ConfigError(f"{CONFIG_NAME}: limits.{key} must be a whole number of at least 1, not {value!r}")
    as_of = config.get("as_of")
    if as_of is None:
        config["as_of"] = dt.date.today()
    elif isinstance(as_of, dt.datetime):
        config["as_of"] = as_of.date()
    elif isinstance(as_of, str):
        try:
            config["as_of"] = dt.date.fromisoformat(as_of)
        except ValueError as exc:
            raise ConfigError(f"{CONFIG_NAME}: as_of '{as_of}' is not a date (YYYY-MM-DD)") from exc
    elif not isinstance(as_of, dt.date):
        raise ConfigError(f"{CONFIG_NAME}: as_of must be a date (YYYY-MM-DD)")
    return config
