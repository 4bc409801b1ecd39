"""Time ``sewer-audit compare`` of two audits of a large network against one audit of it, in the same run.

For each size N the script writes the synthetic network of ``scripts/bench.py`` (``write_network``:
N pipes and N + 1 manholes), writes a second copy of it with a few thousand register changes
(``--changes`` pipes: a third resized one size up, a third with a corrected downstream invert, a
third deleted), audits both, then measures in fresh subprocesses:

* **audit**: one audit of the changed network through the command line (``bench.measure``, the
  same measurement ``scripts/bench.py`` makes);
* **compare**: ``audit.cli.main(["compare", OLD, NEW, "-o", OUT, "-q"])`` of the two audits.

It prints seconds, the ratio compare / audit (the target is at most 1), the peak resident memory
of each subprocess and what compare found, best of ``--repeat`` runs. It asserts nothing: speed is
read, not tested.

    python scripts/bench_compare.py                       # N = 1,000,000
    python scripts/bench_compare.py --sizes 100000 --repeat 2
"""

from __future__ import annotations

import argparse
import json
import shutil
import subprocess
import sys
import tempfile
import time
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pyogrio

sys.path.insert(0, str(Path(__file__).resolve().parent))  # bench.py beside this script

from bench import _peak_rss_mb, measure, write_network

SIZES = (1_000_000,)
CHANGES = 3_000


def change_register(source: Path, target: Path, *, changes: int, seed: int) -> Path:
    """Copy the network of ``source`` (net.gpkg, net.toml) into ``target`` with ``changes`` pipes changed.

    A third of the chosen pipes is resized one size up (x 1.25), a third has its downstream
    invert lowered by 0.1 m, a third is deleted; the manholes are copied unchanged.
    """
    rng = np.random.default_rng(seed)
    pipes = pyogrio.read_dataframe(source / "net.gpkg", layer="pipes", use_arrow=True)
    manholes = pyogrio.read_dataframe(source / "net.gpkg", layer="manholes", use_arrow=True)
    resized, lowered, deleted = np.array_split(rng.choice(len(pipes), size=changes, replace=False), 3)
    pipes.loc[resized, "bore_mm"] = pipes.loc[resized, "bore_mm"] * 1.25
    pipes.loc[lowered, "il_dn"] = pipes.loc[lowered, "il_dn"] - 0.1
    pipes = pipes.drop(index=deleted).reset_index(drop=True)
    target.mkdir(parents=True)
    pyogrio.write_dataframe(pipes, target / "net.gpkg", layer="pipes", driver="GPKG", use_arrow=True)
    pyogrio.write_dataframe(manholes, target / "net.gpkg", layer="manholes", driver="GPKG", use_arrow=True, append=True)
    shutil.copyfile(source / "net.toml", target / "net.toml")
    return target / "net.toml"


def audit_into(config: Path, outdir: Path) -> None:
    """Audit ``config`` into ``outdir`` in a subprocess (the outputs compare reads)."""
    command = [sys.executable, "-c", "import sys; from audit.cli import main; sys.exit(main(sys.argv[1:]))", "run", str(config), "-o", str(outdir), "-q"]
    done = subprocess.run(command, capture_output=True, text=True, check=False)
    if done.returncode not in (0, 3):
        raise SystemExit(f"the audit of {config} failed:\n{done.stderr}")


def compare_child(old: Path, new: Path, outdir: Path) -> None:
    """Entry point of a measuring subprocess: print one JSON line of seconds, peak memory and what was found."""
    from audit.cli import main

    start = time.perf_counter()
    code = main(["compare", str(old), str(new), "-o", str(outdir), "-q"])
    total = time.perf_counter() - start
    if code != 0:
        raise SystemExit(f"compare exited with code {code}")
    found = json.loads((outdir / "compare.json").read_text(encoding="utf-8"))["changes"]["pipes"]
    print(json.dumps({"total": total, "peak_mb": _peak_rss_mb(), "found": found}))


def measure_compare(old: Path, new: Path, *, repeat: int) -> dict[str, Any]:
    """The fastest of ``repeat`` compare subprocesses, with the highest peak memory of them; each writes into a fresh folder."""
    runs = [_compare_once(old, new, old.parent / f"out_compare_{attempt}") for attempt in range(repeat)]
    return min(runs, key=lambda run: run["total"]) | {"peak_mb": max(run["peak_mb"] for run in runs)}


def _compare_once(old: Path, new: Path, outdir: Path) -> dict[str, Any]:
    done = subprocess.run([sys.executable, str(Path(__file__).resolve()), "--child", str(old), str(new), str(outdir)],
                          capture_output=True, text=True, check=False)  # fmt: skip
    shutil.rmtree(outdir, ignore_errors=True)
    if done.returncode != 0:
        raise SystemExit(f"compare run failed:\n{done.stderr}")
    result: dict[str, Any] = json.loads(done.stdout.strip().splitlines()[-1])
    return result


def bench(sizes: Sequence[int], *, changes: int, repeat: int, seed: int, workdir: Path) -> list[str]:
    """Measure each size; return one Markdown table row per size."""
    rows = []
    for pipes in sizes:
        folder = workdir / f"n{pipes}"
        (folder / "old").mkdir(parents=True)
        config = write_network(pipes, folder / "old", seed=seed)
        changed = change_register(config.parent, folder / "new", changes=changes, seed=seed + 1)
        audit_into(config, folder / "audit_old")
        audit_into(changed, folder / "audit_new")
        audit = measure("audit", changed, repeat=repeat)
        compare = measure_compare(folder / "audit_old", folder / "audit_new", repeat=repeat)
        found = compare["found"]
        counts = ", ".join(f"{found[word]:,} {word}" for word in ("added", "removed", "changed", "worse", "better"))
        rows.append(f"| {pipes:,} | {changes:,} | {audit['total']:.2f} | {compare['total']:.2f} | {compare['total'] / audit['total']:.2f} | "
                    f"{audit['peak_mb']:.0f} | {compare['peak_mb']:.0f} | {counts} |")  # fmt: skip
        print(f"measured {pipes:,} pipes", file=sys.stderr)
        shutil.rmtree(folder, ignore_errors=True)
    return rows


def main(argv: Sequence[str] | None = None) -> int:
    """Run the benchmark (or, with ``--child``, one measuring subprocess)."""
    parser = argparse.ArgumentParser(description=(__doc__ or "").splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", metavar="N", help=f"pipe counts (default {SIZES})")
    parser.add_argument("--changes", type=int, default=CHANGES, help=f"pipes changed between the two audits (default {CHANGES:,})")
    parser.add_argument("--repeat", type=int, default=1, help="runs per measurement; the best is shown")
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--child", nargs=3, metavar=("OLD", "NEW", "OUTDIR"), help=argparse.SUPPRESS)
    options = parser.parse_args(argv)
    if options.child:
        compare_child(*(Path(part) for part in options.child))
        return 0
    with tempfile.TemporaryDirectory(prefix="sewer_bench_compare_") as workdir:
        rows = bench(options.sizes or SIZES, changes=options.changes, repeat=max(1, options.repeat), seed=options.seed, workdir=Path(workdir))
    head = ["pipes", "pipes changed", "audit s", "compare s", "ratio", "audit peak MB", "compare peak MB", "compare found (pipes)"]
    print("\n".join(["| " + " | ".join(head) + " |", "|" + "---|" * len(head), *rows]))
    return 0


if __name__ == "__main__":
    sys.exit(main())
