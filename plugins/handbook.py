"""Publish: the static HTML handbook of every asset's test history.

Pages: ``index.html`` (fleet status), ``assets/<asset>.html`` (one per
asset), ``tests/<test>.html`` (one evidence sheet per test) and a copy of each
original result file under ``files/``. Templates live in the site/ theme; page
data is computed here and by the plugins' ``ll_test_sections`` /
``ll_asset_sections``. The site is built in a staging folder and swapped into
place whole.
"""

from __future__ import annotations

import importlib.resources
import re
from pathlib import Path
from typing import Any

import pandas as pd
from loopledger.context import RunContext
from loopledger.contracts import Section
from loopledger.findings import Finding
from loopledger.hookspecs import hookimpl

CAUTIONS = [
    "Never open-circuit the secondary of a current transformer that may carry primary current: "
    "short it at the test block before disconnecting anything.",
    "Isolate, lock out and prove dead before touching terminals; work under the site's permit-to-work "
    "and test-block procedures.",
    "Use instruments, leads and probes rated for the measurement category of the circuit.",
    "Injection testing is for competent, authorised people only. Local codes, the site's rules and licensed "
    "practice take precedence over anything in this handbook.",
]

_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")


def page_name(ident: str) -> str:
    """A file name that is safe on any file system and cannot leave its folder."""
    name = _UNSAFE.sub("_", ident).strip("._") or "_"
    return name[:150]


def render_markdown(text: str | None) -> str:
    """Markdown remarks rendered and sanitised: no script, handler or remote resource survives."""
    if not text or (isinstance(text, float)):
        return ""
    import markdown
    import nh3

    html = markdown.markdown(str(text), extensions=["tables"], output_format="html")
    return nh3.clean(html, tags={"p", "em", "strong", "ul", "ol", "li", "code", "pre", "br", "table",
                                  "thead", "tbody", "tr", "th", "td", "blockquote", "h3", "h4"},
                     attributes={}, url_schemes=set(), link_rel=None)


def environment() -> Any:
    import jinja2

    return jinja2.Environment(
        loader=jinja2.PackageLoader("loopledger.site", "templates"),
        autoescape=True, undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True,
        keep_trailing_newline=True,
    )


def _sections(results: list[list[Section] | None]) -> list[Section]:
    return sorted((s for group in results for s in group or []), key=lambda s: (s.order, s.title))


def _records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    return frame.astype(object).where(frame.notna(), None).to_dict("records")


def build(ctx: RunContext, folder: Path) -> None:
    env = environment()
    rule = str(ctx.section("decision").get("rule", "simple"))
    tests = ctx.tests.copy()
    tests["page"] = tests["test"].map(page_name)
    tests["asset_page"] = tests["asset"].fillna("").astype(str).map(page_name)
    tests["file_copy"] = tests["source_file"].map(lambda rel: "files/" + "/".join(page_name(p) for p in rel.split("/")))
    assets = ctx.assets.copy()
    assets["page"] = assets["asset"].map(page_name)
    common = {"as_of": ctx.as_of.isoformat(), "cautions": CAUTIONS, "rule": rule}
    latest = (tests[tests["valid"].astype(bool)].sort_values(["date", "test"]).groupby("asset").tail(1)
              .set_index("asset"))
    assets["latest_verdict"] = latest["verdict"].reindex(assets.index).fillna("untested")
    assets["latest_date"] = latest["date"].reindex(assets.index).fillna("")
    pages: dict[str, str] = {}
    groups = []
    for (site, area), rows in assets.fillna({"site": "", "area": ""}).groupby(["site", "area"], sort=True):
        groups.append({"site": site, "area": area, "assets": _records(rows.sort_values("asset"))})
    counts = assets["latest_verdict"].value_counts().to_dict()
    invalid = tests[~tests["valid"].astype(bool)]
    pages["index.html"] = env.get_template("index.html").render(
        root="", groups=groups, counts=counts, invalid=_records(invalid), **common)
    for asset in assets.itertuples():
        rows = tests[tests["asset"] == asset.asset].sort_values(["date", "test"], ascending=False)
        pages[f"assets/{asset.page}.html"] = env.get_template("asset.html").render(
            root="../", asset=asset._asdict(), tests=_records(rows),
            sections=_sections(ctx.pm.hook.ll_asset_sections(ctx=ctx, asset=asset.asset)), **common)
    by_test = {t: g for t, g in ctx.points.groupby("test")} if not ctx.points.empty else {}
    for test in tests.itertuples():
        pts = by_test.get(test.test, pd.DataFrame())
        pages[f"tests/{test.page}.html"] = env.get_template("test.html").render(
            root="../", test=test._asdict(), points=_records(pts.sort_values(["phase", "point"])) if len(pts) else [],
            asset=ctx.assets.loc[test.asset].to_dict() if test.asset in ctx.assets.index else {},
            remarks=render_markdown(test.remarks), findings=[f for f in ctx.findings if f.file == test.source_file],
            sections=_sections(ctx.pm.hook.ll_test_sections(ctx=ctx, test=test.test)) if test.valid else [],
            **common)
    for rel, text in pages.items():
        path = folder / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    for test in tests.itertuples():
        data = ctx.raw_files.get(test.source_file)
        if data is not None:
            path = folder / test.file_copy
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(data)
    css = importlib.resources.files("loopledger.site").joinpath("static/style.css").read_text(encoding="utf-8")
    (folder / "style.css").write_text(css, encoding="utf-8")


@hookimpl
def ll_publish(ctx: RunContext, out: Path) -> list[Finding]:
    from loopledger.output import staged_dir

    with staged_dir(out / "handbook") as folder:
        build(ctx, folder)
    return []
