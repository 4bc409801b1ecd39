"""Time the whole audit of a synthetic network against the cost of reading and writing its layers.

For each size N the script writes a GeoPackage of N pipes and N + 1 manholes (a random tree laid
on a grid, mixed sizes and shapes, a few planted register errors) with a config that maps its
fields, then measures in fresh subprocesses:

* the floor: reading both layers with pyogrio (through Arrow) and writing them back with as many
  extra columns as the audit adds (``audit.result.PIPE_COLUMNS`` and ``MANHOLE_COLUMNS``);
* the audit: ``audit.cli.main(["run", config, "-o", outdir, "-q"])``, timed per stage from
  outside (the pipeline's stage markers and the outputs call are wrapped, not edited).

It prints seconds, the ratio audit / floor, the peak resident memory of each subprocess (and of
the audit's GeoPackage writer, a process of its own from 100,000 features, and the most the
audit and its writer held at once, sampled every 0.1 s) and the seconds per stage, best of ``--repeat`` runs. It asserts nothing: speed is read, not tested.

    python scripts/bench.py                 # N = 10,000, 100,000 and 1,000,000
    python scripts/bench.py --quick         # the two smaller sizes
    python scripts/bench.py --sizes 2000 50000 --repeat 3
"""

from __future__ import annotations

import argparse
import itertools
import json
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
import pyogrio
import shapely

SIZES = (10_000, 100_000, 1_000_000)
MEMORY = ("peak_mb", "writer_peak_mb", "together_mb")  # the audit's own peak, its writer's, and the most both held at once
QUICK_SIZES = (10_000, 100_000)
SPACING_M = 40.0  # grid spacing between manholes [m]
CRS = "EPSG:32630"
# planted register errors, as a share of the pipes
PLANTED = {"zero_diameter": 0.002, "sentinel_invert": 0.002, "duplicate_id": 0.001, "drawn_backwards": 0.002,
           "length_off": 0.005}  # fmt: skip
TEXT_COLUMNS = frozenset({"flow_source", "hydraulic_status", "flags", "severity", "reasons", "from_node_id", "to_node_id",
                          "findings"})  # fmt: skip
CONFIG = """\
[pipes]
path = "net.gpkg"
layer = "pipes"
[pipes.fields]
id = "ref"
from_node = "mh_up"
to_node = "mh_dn"
shape = "form"
diameter = "bore_mm"
height = "rise_mm"
width = "span_mm"
upstream_invert = "il_up"
downstream_invert = "il_dn"
length = "len_m"
material = "mat"
install_year = "laid"
[pipes.shapes]
C = "circular"
OV = "egg"
R = "rectangular"
[manholes]
path = "net.gpkg"
layer = "manholes"
[manholes.fields]
id = "mh"
rim = "cover"
invert = "sump"
inflow = "load_ls"
access = "lid"
[hydraulics]
formula = "colebrook-white"
"""


@dataclass(frozen=True)
class Tree:
    """A random spanning tree of a grid of nodes: node 0 is the outfall, ``parent[i] < i``."""

    x: np.ndarray
    y: np.ndarray
    parent: np.ndarray  # per node, -1 at the outfall
    hops: np.ndarray  # pipes between the node and the outfall


def grid_tree(nodes: int, *, rng: np.random.Generator) -> Tree:
    """Nodes on a square grid, each draining to its left or lower neighbour at random.

    Every path to the outfall at the grid's corner goes left or down one cell per pipe, so the
    number of pipes to the outfall is the row plus the column of the node.
    """
    columns = int(np.ceil(np.sqrt(nodes)))
    index = np.arange(nodes)
    row, col = np.divmod(index, columns)
    left = rng.random(nodes) < 0.5
    parent = np.where((row == 0) | ((col > 0) & left), index - 1, index - columns)
    parent[0] = -1
    jitter = rng.uniform(-3.0, 3.0, size=(2, nodes))
    return Tree(col * SPACING_M + jitter[0], row * SPACING_M + jitter[1], parent, row + col)


def _pick(rng: np.random.Generator, count: int, share: float) -> np.ndarray:
    """Distinct random pipe rows, ``share`` of ``count`` (at least one)."""
    return rng.choice(count, size=max(1, int(share * count)), replace=False)


def upstream_counts(tree: Tree) -> np.ndarray:
    """Nodes drained through each node, itself included: summed level by level from the top."""
    count = np.ones(tree.parent.size, dtype=np.int64)
    by_level = np.argsort(-tree.hops, kind="stable")
    bounds = np.flatnonzero(np.diff(tree.hops[by_level])) + 1
    for level in np.split(by_level, bounds)[:-1]:  # one step per level, not per node; the last is the outfall
        np.add.at(count, tree.parent[level], count[level])
    return count


def _sizes(rng: np.random.Generator, drained: np.ndarray) -> dict[str, np.ndarray]:
    """Shape codes and sizes [mm], growing with the manholes drained, a few a size too small."""
    pipes = drained.size
    form = rng.choice(np.array(["C", "OV", "R"], dtype=object), size=pipes, p=[0.9, 0.06, 0.04])
    bores = np.array([225.0, 300.0, 375.0, 450.0, 600.0, 750.0, 900.0, 1200.0, 1500.0])
    step = np.searchsorted(np.array([4, 12, 30, 80, 200, 500, 1500, 5000]), drained)
    step = np.clip(step - (rng.random(pipes) < 0.05), 0, bores.size - 1)
    bore = bores[step]
    round_pipe = form == "C"
    rise = np.where(round_pipe, np.nan, np.where(form == "OV", 1.5, 1.0) * bore)
    span = np.where(round_pipe, np.nan, bore)
    return {"form": form, "bore_mm": np.where(round_pipe, bore, np.nan), "rise_mm": rise, "span_mm": span}


def _levels(tree: Tree, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Manhole invert and cover levels [m]: falling about 0.8 % towards the outfall."""
    invert = 50.0 + 0.008 * SPACING_M * tree.hops + rng.uniform(-0.05, 0.05, tree.hops.size)
    return invert, invert + rng.uniform(1.2, 3.5, tree.hops.size)


def make_layers(pipes: int, *, seed: int) -> tuple[gpd.GeoDataFrame, gpd.GeoDataFrame]:
    """The synthetic pipe and manhole layers, with the register errors of ``PLANTED``."""
    rng = np.random.default_rng(seed)
    tree = grid_tree(pipes + 1, rng=rng)
    names = np.char.add("MH", np.arange(pipes + 1).astype("U")).astype(object)
    invert, cover = _levels(tree, rng)
    child = np.arange(1, pipes + 1)
    up, down = child, tree.parent[child]
    ends = np.stack([np.column_stack([tree.x[up], tree.y[up]]), np.column_stack([tree.x[down], tree.y[down]])], axis=1)
    backwards = _pick(rng, pipes, PLANTED["drawn_backwards"])
    ends[backwards] = ends[backwards, ::-1]
    refs = np.char.add("S", child.astype("U")).astype(object)
    refs[_pick(rng, pipes, PLANTED["duplicate_id"])] = "S1"
    frame = {"ref": refs, "mh_up": names[up], "mh_dn": names[down], **_sizes(rng, upstream_counts(tree)[up]),
             "il_up": invert[up] - 0.02, "il_dn": invert[down] + 0.02}  # fmt: skip
    frame["bore_mm"][_pick(rng, pipes, PLANTED["zero_diameter"])] = 0.0
    frame["il_dn"][_pick(rng, pipes, PLANTED["sentinel_invert"])] = -9999.0
    length = np.hypot(*(ends[:, 1] - ends[:, 0]).T)
    length[_pick(rng, pipes, PLANTED["length_off"])] *= 1.5
    frame |= {"len_m": np.round(length, 2), "mat": rng.choice(np.array(["PVC", "VC", "CONC", "BRICK"], dtype=object), pipes),
              "laid": rng.integers(1890, 2024, pipes).astype(float)}  # fmt: skip
    pipe_layer = gpd.GeoDataFrame(frame, geometry=shapely.linestrings(ends), crs=CRS)
    manholes = gpd.GeoDataFrame(
        {"mh": names, "cover": cover, "sump": invert, "load_ls": rng.uniform(0.0, 4.0, pipes + 1),
         "lid": np.where(rng.random(pipes + 1) < 0.97, "Y", "N").astype(object)},
        geometry=shapely.points(tree.x, tree.y), crs=CRS,
    )  # fmt: skip
    return pipe_layer, manholes


def write_network(pipes: int, folder: Path, *, seed: int) -> Path:
    """Write net.gpkg (layers ``pipes`` and ``manholes``) and net.toml into ``folder``."""
    pipe_layer, manholes = make_layers(pipes, seed=seed)
    gpkg = folder / "net.gpkg"
    gpkg.unlink(missing_ok=True)  # the manholes are appended to the file the pipes start
    pyogrio.write_dataframe(pipe_layer, gpkg, layer="pipes", driver="GPKG", use_arrow=True)
    pyogrio.write_dataframe(manholes, gpkg, layer="manholes", driver="GPKG", use_arrow=True, append=True)
    config = folder / "net.toml"
    config.write_text(CONFIG, encoding="utf-8")
    return config


def _with_extra(frame: pd.DataFrame, names: Sequence[str], *, text: np.ndarray) -> pd.DataFrame:
    """``frame`` with one column per name: text for the audit's text columns, else numbers."""
    numbers = np.linspace(0.0, 1.0, len(frame))
    extra = {name: text if name in TEXT_COLUMNS else numbers for name in names}
    return frame.assign(**extra)


def floor_run(config: Path, outdir: Path) -> dict[str, float]:
    """Read both layers (Arrow) and write them back with as many extra columns as the audit adds."""
    from audit.result import MANHOLE_COLUMNS, PIPE_COLUMNS

    start = time.perf_counter()
    gpkg = config.parent / "net.gpkg"
    pipes = pyogrio.read_dataframe(gpkg, layer="pipes", use_arrow=True)
    manholes = pyogrio.read_dataframe(gpkg, layer="manholes", use_arrow=True)
    read = time.perf_counter()
    target = outdir / "floor.gpkg"
    pipes = _with_extra(pipes, list(PIPE_COLUMNS), text=pipes["ref"].to_numpy(dtype=object))
    manholes = _with_extra(manholes, list(MANHOLE_COLUMNS), text=manholes["mh"].to_numpy(dtype=object))
    pyogrio.write_dataframe(pipes, target, layer="pipes", driver="GPKG", use_arrow=True)
    pyogrio.write_dataframe(manholes, target, layer="manholes", driver="GPKG", use_arrow=True, append=True)
    end = time.perf_counter()
    return {"total": end - start, "read": read - start, "write": end - read}


def _wrap(owner: Any, name: str, before: Callable[[], None], after: Callable[[], None]) -> None:
    """Replace ``owner.name`` by a function that calls ``before`` and ``after`` around it."""
    inner = getattr(owner, name)

    def wrapped(*args: Any, **kwargs: Any) -> Any:
        before()
        try:
            return inner(*args, **kwargs)
        finally:
            after()

    setattr(owner, name, wrapped)


def audit_run(config: Path, outdir: Path) -> dict[str, float]:
    """The audit through the CLI's entry function, with the seconds of every pipeline stage."""
    import audit.outputs
    import audit.pipeline
    from audit.cli import main

    marks: list[tuple[str, float]] = []
    stages = audit.pipeline.STAGES
    step = audit.pipeline._step

    def mark(bar: object, index: int) -> None:
        marks.append((stages[index], time.perf_counter()))
        step(bar, index)  # type: ignore[arg-type]

    audit.pipeline._step = mark
    _wrap(audit.pipeline, "run", lambda: None, lambda: marks.append(("end of run", time.perf_counter())))
    _wrap(audit.outputs, "write_outputs", lambda: marks.append(("writing outputs", time.perf_counter())),
          lambda: marks.append(("end of writing", time.perf_counter())))  # fmt: skip
    start = time.perf_counter()
    code = main(["run", str(config), "-o", str(outdir), "-q"])
    total = time.perf_counter() - start
    if code not in (0, 3):
        raise SystemExit(f"the audit of {config} exited with code {code}")
    seconds = {name: later - now for (name, now), (_, later) in itertools.pairwise(marks)}
    seconds.pop("end of run", None)
    return {"total": total, **seconds}


def _peak_rss_mb() -> float:
    """This process's peak resident memory [MB], from /proc."""
    return _resident_mb(Path("/proc/self/status").read_text(encoding="utf-8"), "VmHWM") or float("nan")


def _resident_mb(status: str, field: str) -> float:
    """A memory figure [MB] of a /proc status text (``VmHWM``, ``VmRSS``); 0 where absent."""
    for line in status.splitlines():
        if line.startswith(f"{field}:"):
            return int(line.split()[1]) / 1024.0
    return 0.0


class ChildrenPeak:
    """The largest peak resident memory [MB] of the GeoPackage writer processes this process starts, read from
    /proc every 0.1 s while they run (once they run the writer's program); 0 when none ran. (``getrusage`` cannot
    tell it: a child's figure there counts this whole process as it was when the child was forked, before it
    started its own program.) ``together_mb``: the most this process and its writers held at once, from the
    same samples (their resident memory summed)."""

    def __init__(self) -> None:
        self.peak_mb = 0.0
        self.together_mb = 0.0
        self._done = threading.Event()
        self._thread = threading.Thread(target=self._watch, daemon=True)

    def __enter__(self) -> ChildrenPeak:
        self._thread.start()
        return self

    def __exit__(self, *_: object) -> None:
        self._done.set()
        self._thread.join()

    def _watch(self) -> None:
        while not self._done.wait(0.1):
            together = _resident_mb(Path("/proc/self/status").read_text(encoding="utf-8"), "VmRSS")
            for listing in Path("/proc/self/task").glob("*/children"):
                for pid in listing.read_text(encoding="utf-8").split():
                    try:
                        started = b"layer_process" in Path(f"/proc/{pid}/cmdline").read_bytes()
                        status = Path(f"/proc/{pid}/status").read_text(encoding="utf-8")
                    except OSError:
                        continue  # it ended meanwhile
                    if not started:
                        continue  # forked but not yet the writer: its figure is still this whole process's
                    self.peak_mb = max(self.peak_mb, _resident_mb(status, "VmHWM"))
                    together += _resident_mb(status, "VmRSS")
            self.together_mb = max(self.together_mb, together)


def child(kind: str, config: Path, outdir: Path) -> None:
    """Entry point of a measuring subprocess: print one JSON line of seconds and peak memory (its own and its children's)."""
    outdir.mkdir(parents=True, exist_ok=True)
    with ChildrenPeak() as children:
        seconds = floor_run(config, outdir) if kind == "floor" else audit_run(config, outdir)
    own = _peak_rss_mb()
    print(json.dumps({**seconds, "peak_mb": own, "writer_peak_mb": children.peak_mb, "together_mb": max(own, children.together_mb)}))


def measure(kind: str, config: Path, *, repeat: int) -> dict[str, float]:
    """Best of ``repeat`` subprocess runs (by total seconds); each writes into a fresh folder."""
    runs = []
    for attempt in range(repeat):
        outdir = config.parent / f"out_{kind}_{attempt}"
        command = [sys.executable, str(Path(__file__).resolve()), "--child", kind, str(config), str(outdir)]
        done = subprocess.run(command, capture_output=True, text=True, check=False)
        if done.returncode != 0:
            raise SystemExit(f"{kind} run failed:\n{done.stderr}")
        runs.append(json.loads(done.stdout.strip().splitlines()[-1]))
        shutil.rmtree(outdir, ignore_errors=True)
    best = min(runs, key=lambda run: run["total"])
    return best | {name: max(run[name] for run in runs) for name in MEMORY}


@dataclass
class Row:
    """One size's measurements."""

    pipes: int
    floor: dict[str, float]
    audit: dict[str, float]


def bench(sizes: Sequence[int], *, repeat: int, seed: int, workdir: Path) -> list[Row]:
    """Generate and measure each size in turn; print a progress line per size to stderr."""
    rows = []
    for pipes in sizes:
        folder = workdir / f"n{pipes}"
        folder.mkdir()
        config = write_network(pipes, folder, seed=seed)
        row = Row(pipes, measure("floor", config, repeat=repeat), measure("audit", config, repeat=repeat))
        print(f"measured {pipes:,} pipes", file=sys.stderr)
        rows.append(row)
        shutil.rmtree(folder, ignore_errors=True)
    return rows


def table(rows: Sequence[Row]) -> str:
    """The results as a Markdown table: one row per size, then one column per stage.

    ``other`` is the audit's time outside the timed stages: the command line's own work after
    the outputs (report.html and the like) and before the pipeline.
    """
    stages = [name for name in rows[0].audit if name not in ("total", *MEMORY)] if rows else []
    head = ["pipes", "floor s", "audit s", "ratio", "floor peak MB", "audit peak MB", "writer peak MB", "together peak MB", *stages, "other"]
    lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    for row in rows:
        cells = [f"{row.pipes:,}", f"{row.floor['total']:.2f}", f"{row.audit['total']:.2f}",
                 f"{row.audit['total'] / row.floor['total']:.2f}", f"{row.floor['peak_mb']:.0f}",
                 f"{row.audit['peak_mb']:.0f}", f"{row.audit['writer_peak_mb']:.0f}", f"{row.audit['together_mb']:.0f}", *(f"{row.audit.get(name, float('nan')):.2f}" for name in stages),
                 f"{row.audit['total'] - sum(row.audit.get(name, 0.0) for name in stages):.2f}"]  # fmt: skip
        lines.append("| " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the benchmark (or, with ``--child``, one measuring subprocess)."""
    parser = argparse.ArgumentParser(description=(__doc__ or "").splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", metavar="N", help=f"pipe counts (default {SIZES})")
    parser.add_argument("--quick", action="store_true", help=f"only {QUICK_SIZES}")
    parser.add_argument("--repeat", type=int, default=1, help="runs per measurement; the best is shown")
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--child", nargs=3, metavar=("KIND", "CONFIG", "OUTDIR"), help=argparse.SUPPRESS)
    options = parser.parse_args(argv)
    if options.child:
        child(options.child[0], Path(options.child[1]), Path(options.child[2]))
        return 0
    sizes = options.sizes or (QUICK_SIZES if options.quick else SIZES)
    with tempfile.TemporaryDirectory(prefix="sewer_bench_") as workdir:
        rows = bench(sizes, repeat=max(1, options.repeat), seed=options.seed, workdir=Path(workdir))
    print(table(rows))
    return 0


if __name__ == "__main__":
    sys.exit(main())
