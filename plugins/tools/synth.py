"""``loopledger synth --assets N --years Y OUT_DIR``: write an invented evidence folder for benchmarks.

Everything written is invented (a deterministic pseudo-random fleet of
current transducers, seed ``--seed``): it exercises the pipeline at scale and
is never evidence. Each asset gets one test a year; most are YAML, one in ten
a CSV; a few drift out of tolerance and are adjusted, a few fail.
"""

from __future__ import annotations

import argparse
import random
from pathlib import Path

from loopledger.contracts import Command
from loopledger.hookspecs import hookimpl

ASSET_HEADER = ("asset,description,site,area,signal,input_min,input_max,input_unit,output_min,output_max,"
                "output_unit,characteristic,accuracy,ct_ratio,display_min,display_max,display_unit,"
                "max_load_ohm,power,supply_v,min_terminal_v,receiver_ohm,cable_mm2,cable_awg,cable_length_m,"
                "interval_months")
CSV_HEADER = "asset,date,technician,connection,method,injection,ambient_c,source,meter,shunt,phase,input,reading"
SITES = ("North works", "River station", "Hill substation", "East plant")
TECHNICIANS = ("A. Ngata", "B. Okafor", "C. Lindqvist", "D. Ramos", "E. Sato")
RATIOS = (("150/5", 5, 150), ("300/5", 5, 300), ("800/1", 1, 800), ("1600/1", 1, 1600))
INSTRUMENTS = """# invented reference instruments for a synthetic fleet
SYN-SRC-1:
  kind: source
  description: Invented secondary-injection source
  range: 10 A
  accuracy: 0.1 %rdg + 0.05 %range
  calibrated: {start}-01-01
  due: 2099-01-01
SYN-DMM-1:
  kind: meter
  description: Invented multimeter
  calibrated: {start}-01-01
  due: 2099-01-01
  ranges:
    - {{range: 20 mA, accuracy: 0.05 %rdg + 2 digits, resolution: 0.001 mA, burden: 1.8 mV/mA}}
    - {{range: 2 V, accuracy: 0.05 %rdg + 2 digits, resolution: 0.0001 V}}
SYN-SH-1:
  kind: shunt
  description: Invented precision shunt
  resistance: 100 ohm
  tolerance: 0.01 %
  tempco: 5 ppm/K
  reference_temperature: 23 degC
  calibrated: {start}-01-01
  due: 2099-01-01
"""


def _points(rng: random.Random, offset: float, gain: float, shunt: bool) -> list[tuple[str, str]]:
    out = []
    for pct in (0, 25, 50, 75, 100):
        ma = 4 + 16 * pct / 100 * (1 + gain) + offset + rng.gauss(0, 0.002)
        out.append((f"{pct} %", f"{ma / 10:.5f} V" if shunt else f"{ma:.4f} mA"))
    return out


def _yaml(asset: str, date: str, tech: str, method: str, ambient: float, found: list[tuple[str, str]],
          left: list[tuple[str, str]] | None) -> str:
    shunt = ", shunt: SYN-SH-1" if method == "shunt" else ""
    lines = [f"asset: {asset}", f"date: {date}", f"technician: {tech}", "connection: standalone",
             f"method: {method}", "injection: secondary", f"ambient_c: {ambient:.1f}",
             f"instruments: {{source: SYN-SRC-1, meter: SYN-DMM-1{shunt}}}", "as_found:"]
    lines += [f"  - {{input: {i}, reading: {r}}}" for i, r in found]
    if left:
        lines.append("as_left:")
        lines += [f"  - {{input: {i}, reading: {r}}}" for i, r in left]
    lines.append("remarks: Invented test for a synthetic fleet.")
    return "\n".join(lines) + "\n"


def _csv(asset: str, date: str, tech: str, method: str, ambient: float, found: list[tuple[str, str]],
         left: list[tuple[str, str]] | None) -> str:
    shunt = "SYN-SH-1" if method == "shunt" else ""
    head = f"{asset},{date},{tech},standalone,{method},secondary,{ambient:.1f},SYN-SRC-1,SYN-DMM-1,{shunt}"
    rows = [CSV_HEADER] + [f"{head},as_found,{i},{r}" for i, r in found]
    rows += [f"{head},as_left,{i},{r}" for i, r in left or []]
    return "\n".join(rows) + "\n"


def synthesise(folder: Path, assets: int, years: int, seed: int = 20261201, last_year: int = 2025) -> int:
    """Write the fleet; return the number of result files written."""
    rng = random.Random(seed)
    start = last_year - years + 1
    folder.mkdir(parents=True, exist_ok=True)
    rows = [ASSET_HEADER]
    plans = []
    for n in range(assets):
        site = SITES[n % len(SITES)]
        area = f"MCC{1 + (n // len(SITES)) % 12}"
        ratio, secondary, primary = RATIOS[n % len(RATIOS)]
        asset = f"SYN-{n:05d}-I"
        rows.append(f"{asset},Invented feeder {n} current,{site},{area},current-transducer,0,{secondary},A,4,20,"
                    f"mA,linear,0.5,{ratio},0,{primary},A,600,self,,,250,1.5,,40,12")
        plans.append((asset, site))
    (folder / "assets.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    (folder / "instruments.yaml").write_text(INSTRUMENTS.format(start=start), encoding="utf-8")
    (folder / "loopledger.toml").write_text(f"# invented synthetic fleet\nas_of = {last_year}-12-31\n",
                                            encoding="utf-8")
    written = 0
    for asset, site in plans:
        offset, gain = rng.gauss(0, 0.01), rng.gauss(0, 0.001)
        drift = rng.gauss(0, 0.015)
        month, day = rng.randint(1, 12), rng.randint(1, 28)
        slug = site.split()[0].lower()
        for year in range(start, last_year + 1):
            offset += drift + rng.gauss(0, 0.01)
            date = f"{year}-{month:02d}-{day:02d}"
            method = "shunt" if rng.random() < 0.3 else "direct"
            shunt = method == "shunt"
            found = _points(rng, offset, gain, shunt)
            left = None
            if abs(offset) > 0.07 and rng.random() < 0.8:  # adjusted back near zero
                offset, gain = rng.gauss(0, 0.005), rng.gauss(0, 0.0005)
                left = _points(rng, offset, gain, shunt)
            tech = TECHNICIANS[rng.randrange(len(TECHNICIANS))]
            ambient = rng.uniform(12, 32)
            as_csv = rng.random() < 0.1
            text = (_csv if as_csv else _yaml)(asset, date, tech, method, ambient, found, left)
            path = folder / "results" / slug / str(year) / f"{asset}_{date}.{'csv' if as_csv else 'yaml'}"
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_text(text, encoding="utf-8")
            written += 1
    return written


def _add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("out_dir", type=Path, help="folder to write the invented evidence folder into")
    parser.add_argument("--assets", type=int, default=200, help="number of assets (default 200)")
    parser.add_argument("--years", type=int, default=10, help="years of annual tests (default 10)")
    parser.add_argument("--seed", type=int, default=20261201, help="pseudo-random seed (default fixed)")
    parser.add_argument("--last-year", dest="last_year", type=int, default=2025,
                        help="year of the newest tests (default 2025)")


def _run(args: argparse.Namespace) -> int:
    import datetime as dt
    import sys

    from loopledger.plugins.check.schema_check import EARLIEST

    if args.assets < 1 or args.years < 1:
        sys.stderr.write("loopledger synth: --assets and --years must be at least 1\n")
        return 3
    if args.last_year >= dt.date.today().year or args.last_year - args.years + 1 < EARLIEST.year:
        # the schema check refuses dates in the future and before EARLIEST: the fleet must pass it
        sys.stderr.write(f"loopledger synth: the tests must fall between {EARLIEST.year} and last year "
                         f"(--last-year {args.last_year}, --years {args.years})\n")
        return 3
    if (args.out_dir / "results").exists():
        sys.stderr.write(f"loopledger synth: '{args.out_dir}' already holds results/; choose an empty folder\n")
        return 3
    n = synthesise(args.out_dir, args.assets, args.years, args.seed, args.last_year)
    sys.stdout.write(f"wrote {n} invented result files for {args.assets} assets to {args.out_dir}\n")
    return 0


@hookimpl
def ll_cli_commands() -> list[Command]:
    return [Command("synth", "write an invented evidence folder (a synthetic fleet) for benchmarks",
                    _add_arguments, _run)]
