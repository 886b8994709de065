"""Monte Carlo propagation (JCGM 101:2008) for the points where the GUM's first-order budget fails.

The first-order law of propagation (JCGM 100:2008 §5.1.2) takes the model as linear over the width of
each input's distribution. A square-root (DP flow) characteristic is not, near its origin, and neither
is a low-flow cut-off, where the output steps to zero flow. A point is simulated instead when the
source's half-width a (in fractions of the input span) reaches the non-linearity:

- square root: a ≥ x, the distance to the root's origin, or a large second-order term: for a
  rectangular source (u_x = a/√3) the GUM's second-order term |f''|·u_x²/√2 above
  :data:`SECOND_ORDER` × the first-order |f'|·u_x, i.e. u_x / (2√2·x) > 0.1 for f = √x;
- cut-off: a ≥ |x − x_c|, the distance to the input at which the output reaches the cut-off.

The model of a simulated point is the true error e + S, with S = Σ δ_i − (f(x + δ_x) − f(x))·span:
δ_x the source (rectangular on ±a), δ_i every other budget term in output units, drawn from its own
distribution (rectangular, triangular, normal, or a t with ν_i degrees of freedom scaled by u_i for a
type A term, JCGM 101 §6.4.9). Trials run in blocks of :data:`BLOCK` until each point's U is stable
to two significant digits (the adaptive procedure of JCGM 101 §7.9: 2·s_U/√h ≤ δ = ½·10^l, l the
place of U's second significant digit), from :data:`MIN_BLOCKS` to :data:`MAX_BLOCKS` blocks.

Results per point: u (the standard deviation of S), U (half the probabilistically symmetric 95.45 %
coverage interval), the interval itself (``mc_low``, ``mc_high``, as a deviation of the true error
from the measured error), and the quantiles of S, from which the conformity stage works out the
specific risk. Each point has its own random generator, seeded from :data:`SEED` and the point's file,
phase and number, so its figures do not depend on which other points are in the run; the model is
evaluated for all points of a chunk at once (numpy), :data:`CHUNK` points at a time to bound memory.
"""

from __future__ import annotations

import hashlib
import math
from typing import Any

import numpy as np
import pandas as pd

#: the generator's fixed seed (any fixed number: results must be the same on every run)
SEED = 20260101
BLOCK = 10_000
#: at least this many blocks before the stopping rule is trusted (our choice: the spread of two or three
#: block estimates says little, least of all for the two-humped distribution at a cut-off)
MIN_BLOCKS = 10
MAX_BLOCKS = 100
#: points simulated together (memory: CHUNK × trials floats)
CHUNK = 16
#: a second-order term larger than this fraction of the first-order one makes the budget invalid
SECOND_ORDER = 0.1
COVERAGE = 0.9545
#: the levels at which the simulated distribution is kept for the specific risk
LEVELS = np.linspace(0.0, 1.0, 4001)
METHOD = "Monte Carlo (JCGM 101)"


def model(x: np.ndarray, is_sqrt: np.ndarray, cut_pct: np.ndarray) -> np.ndarray:
    """Output as a fraction of span for input fraction ``x``: √x or x, held at 0 strictly below the cut-off."""
    out = np.where(is_sqrt, np.sqrt(np.clip(x, 0.0, None)), x)
    pct = out * 100.0
    below = (cut_pct > 0) & (pct < cut_pct) & ~np.isclose(pct, cut_pct, rtol=1e-9, atol=1e-9)
    return np.where(below, 0.0, out)


def _inputs(pts: pd.DataFrame, terms: pd.DataFrame) -> pd.DataFrame:
    """Per point with a source term: x, a (fractions of the input span), sqrt, cut-off and output span."""
    source = terms[terms["component"] == "source"].drop_duplicates("row").set_index("row")
    rows = pts.loc[pts.index.intersection(source.index)]
    if rows.empty:
        return pd.DataFrame(columns=["x", "a", "is_sqrt", "cut", "span"])
    lo, hi = rows["input_min"].astype(float), rows["input_max"].astype(float)
    same_unit = rows["injected_unit"].astype(str) == rows["input_unit"].astype(str)
    cut = pd.to_numeric(rows["low_flow_cutoff_pct"], errors="coerce").fillna(0.0) \
        if "low_flow_cutoff_pct" in rows.columns else pd.Series(0.0, index=rows.index)
    out = pd.DataFrame({"x": (rows["injected"].astype(float) - lo) / (hi - lo),
                        "a": source.loc[rows.index, "half_width"].astype(float) / (hi - lo).abs(),
                        "is_sqrt": rows["characteristic"].fillna("linear").eq("sqrt"),
                        "cut": cut.where(rows.get("signal", pd.Series("", index=rows.index))
                                         .eq("process-transmitter"), 0.0),
                        "span": rows["output_max"].astype(float) - rows["output_min"].astype(float)},
                       index=rows.index)
    return out[same_unit & out["x"].notna() & out["a"].notna()]


def needs_monte_carlo(pts: pd.DataFrame, terms: pd.DataFrame) -> pd.DataFrame:
    """The :func:`_inputs` of the points whose first-order budget is not valid (see the module text)."""
    got = _inputs(pts, terms)
    if got.empty:
        return got
    x, a, is_sqrt, cut = got["x"], got["a"], got["is_sqrt"], got["cut"]
    x_cut = np.where(is_sqrt, (cut / 100.0) ** 2, cut / 100.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        second = is_sqrt & (x > 0) & ((a / math.sqrt(3.0)) / (2.0 * math.sqrt(2.0) * x) > SECOND_ORDER)
    flagged = (is_sqrt & (a >= x)) | ((cut > 0) & (a >= (x - x_cut).abs())) | second
    return got[flagged]


def _seed(key: str) -> np.random.Generator:
    digest = int.from_bytes(hashlib.sha256(key.encode("utf-8")).digest()[:8], "little")
    return np.random.default_rng([SEED, digest])


def _draw(rng: np.random.Generator, kind: str, dof: float, n: int) -> np.ndarray:
    """n draws of a term's standardised error: the multiple of its half-width (or of u_i for normal/t)."""
    if kind == "rectangular":
        return rng.uniform(-1.0, 1.0, n)
    if kind == "triangular":
        return rng.triangular(-1.0, 0.0, 1.0, n)
    if math.isfinite(dof):
        return rng.standard_t(dof, n)
    return rng.standard_normal(n)


def _others(terms: pd.DataFrame, rows: pd.Index) -> dict[Any, list[tuple[str, float, float]]]:
    """Per point, its non-source terms as (distribution, scale in output units, dof)."""
    mine = terms[terms["row"].isin(rows) & (terms["component"] != "source")]
    out: dict[Any, list[tuple[str, float, float]]] = {r: [] for r in rows}
    for row, dist, half, c, contribution, dof in zip(mine["row"], mine["distribution"], mine["half_width"],
                                                     mine["sensitivity"], mine["contribution"], mine["dof"],
                                                     strict=True):
        kind = "rectangular" if dist == "rectangular" else "triangular" if dist == "triangular" else "normal"
        scale = abs(float(c)) * float(half) if kind != "normal" else float(contribution)
        if np.isfinite(scale):
            out[row].append((kind, scale, float(dof)))
    return out


def _block(inputs: pd.DataFrame, others: dict[Any, list[tuple[str, float, float]]],
           rngs: list[np.random.Generator]) -> np.ndarray:
    """One block of S for each point of ``inputs`` (rows: points, columns: trials)."""
    n = len(inputs)
    width = max([len(v) for v in others.values()] + [0])
    unit = np.stack([rng.uniform(-1.0, 1.0, BLOCK) for rng in rngs])  # the source: rectangular
    extra = np.zeros((n, width, BLOCK))
    scale = np.zeros((n, width, 1))
    for i, (row, rng) in enumerate(zip(inputs.index, rngs, strict=True)):
        for j, (kind, s, dof) in enumerate(others[row]):
            extra[i, j], scale[i, j, 0] = _draw(rng, kind, dof, BLOCK), s
    x = inputs["x"].to_numpy()[:, None]
    is_sqrt = inputs["is_sqrt"].to_numpy(dtype=bool)[:, None]
    cut = inputs["cut"].to_numpy(dtype=float)[:, None]
    shifted = model(x + inputs["a"].to_numpy()[:, None] * unit, is_sqrt, cut)
    delta_f = (shifted - model(x, is_sqrt, cut)) * inputs["span"].to_numpy()[:, None]
    return np.asarray((extra * scale).sum(axis=1) - delta_f)


def _interval(samples: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    tail = (1.0 - COVERAGE) / 2.0
    low, high = np.quantile(samples, [tail, 1.0 - tail], axis=-1)
    return low, high


def _tolerance(big_u: np.ndarray) -> np.ndarray:
    """JCGM 101 §7.9.2: δ = ½·10^l, U written with two significant digits as c·10^l."""
    with np.errstate(divide="ignore"):
        place = np.floor(np.log10(np.where(big_u > 0, big_u, np.nan))) - 1.0
    return 0.5 * 10.0 ** np.nan_to_num(place, nan=-300.0)


def simulate(inputs: pd.DataFrame, others: dict[Any, list[tuple[str, float, float]]],
             keys: pd.Series) -> tuple[pd.DataFrame, pd.DataFrame]:
    """(u, U, k, mc_low, mc_high, trials per point; the quantiles of S at :data:`LEVELS` per point)."""
    results: list[pd.DataFrame] = []
    quantiles: list[pd.DataFrame] = []
    for start in range(0, len(inputs), CHUNK):
        part = inputs.iloc[start:start + CHUNK]
        rngs = [_seed(str(keys[row])) for row in part.index]
        blocks: list[np.ndarray] = []
        estimates: list[np.ndarray] = []
        stop = np.full(len(part), MAX_BLOCKS)  # each point stops on its own, so others never move its figures
        done = np.zeros(len(part), dtype=bool)
        while len(blocks) < MAX_BLOCKS and not done.all():
            block = _block(part, others, rngs)
            blocks.append(block)
            low, high = _interval(block)
            estimates.append((high - low) / 2.0)
            h = len(blocks)
            if h >= MIN_BLOCKS:
                spread = np.std(np.stack(estimates), axis=0, ddof=1)
                ok = 2.0 * spread / math.sqrt(h) <= _tolerance(np.mean(np.stack(estimates), axis=0))
                stop[ok & ~done] = h
                done |= ok
        stacked = np.stack(blocks, axis=1)  # points × blocks × trials
        rows = []
        for i, h in enumerate(stop.tolist()):
            pooled = stacked[i, :h].ravel()
            low, high = _interval(pooled)
            rows.append((pooled.std(ddof=1), (high - low) / 2.0, low, high, pooled.size,
                         np.quantile(pooled, LEVELS)))
        results.append(pd.DataFrame({"u": [r[0] for r in rows], "U": [r[1] for r in rows],
                                     "mc_low": [r[2] for r in rows], "mc_high": [r[3] for r in rows],
                                     "trials": [r[4] for r in rows]}, index=part.index))
        quantiles.append(pd.DataFrame(np.stack([r[5] for r in rows]), index=part.index,
                                      columns=[f"q{i}" for i in range(len(LEVELS))]))
    if not results:
        return pd.DataFrame(columns=["u", "U", "k", "mc_low", "mc_high", "trials"]), pd.DataFrame()
    out = pd.concat(results)
    out["k"] = out["U"] / out["u"]
    return out, pd.concat(quantiles)


def run(pts: pd.DataFrame, terms: pd.DataFrame) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Simulate every point whose first-order budget is not valid: (per-point results, quantiles)."""
    flagged = needs_monte_carlo(pts, terms)
    if flagged.empty:
        return simulate(flagged, {}, pd.Series(dtype=object))
    keys = (pts.loc[flagged.index, "source_file"].astype(str) + "|" + pts.loc[flagged.index, "phase"].astype(str)
            + "|" + pts.loc[flagged.index, "point"].astype(str))
    return simulate(flagged, _others(terms, flagged.index), keys)


def specific_risk(quantiles: pd.DataFrame, error: pd.Series, mpe: pd.Series) -> pd.Series:
    """P(|e + S| > MPE) from the kept quantiles of S (the simulated distribution's CDF, interpolated)."""
    out = pd.Series(np.nan, index=quantiles.index, dtype=float)
    levels = quantiles.drop(columns="source_file", errors="ignore")
    for row in levels.index:
        q = levels.loc[row].to_numpy(dtype=float)
        e, m = float(error[row]), float(mpe[row])
        above = 1.0 - np.interp(m - e, q, LEVELS, left=0.0, right=1.0)
        below = np.interp(-m - e, q, LEVELS, left=0.0, right=1.0)
        out[row] = above + below
    return out


def risk_decisions(quantiles: pd.DataFrame, error: pd.Series, mpe: pd.Series, target: float,
                   ) -> tuple[pd.Series, pd.Series]:
    """The ``risk`` rule's statements (ILAC-G8:2019 §4.2.3) and acceptance limits for simulated points, from
    their own distribution: pass where the specific risk at the measured error is at most ``target``,
    conditional pass up to the MPE, conditional fail while P(conform) > ``target``, fail beyond. The limit is
    the largest |e| on the error's side whose risk is at most ``target`` (bisection; 0 where even e = 0 carries
    more: no acceptance zone). The distribution may be lopsided (a cut-off), so the two sides can differ."""
    idx = quantiles.index
    e, m = error[idx].astype(float), mpe[idx].astype(float)
    risk = specific_risk(quantiles, e, m)
    sign = np.where(e.to_numpy() < 0, -1.0, 1.0)
    low, high = np.zeros(len(idx)), m.to_numpy(dtype=float).copy()
    zero = specific_risk(quantiles, pd.Series(0.0, index=idx), m).to_numpy()
    for _ in range(60):
        mid = (low + high) / 2.0
        ok = specific_risk(quantiles, pd.Series(sign * mid, index=idx), m).to_numpy() <= target
        low, high = np.where(ok, mid, low), np.where(ok, high, mid)
    accept = pd.Series(np.where(zero <= target, low, 0.0), index=idx)
    inside = e.abs() <= m
    decision = np.select([risk <= target, inside, (1.0 - risk) > target],
                         ["pass", "conditional-pass", "conditional-fail"], "fail")
    return pd.Series(decision, index=idx), accept
