"""Kill audits at many moments and check that the output folder is never a mixture or a partial set.

A synthetic network (``scripts/bench.py``'s tree) is audited once into ``out`` (the earlier,
complete output). Then, again and again, ``sewer-audit run ... -o out --overwrite`` is started in
a subprocess and killed (SIGKILL, or SIGINT as Ctrl-C sends) after a delay spread over the
length of a run. After each kill the folder must hold either the earlier output, byte for byte,
or a complete new one (every file present, the same network, the summary and the report from
one run), never a mix of the two and never a partial set. After the last kill one more run must
leave nothing beside ``out`` but the inputs (what killed runs left behind is tidied). An
interrupt (SIGINT) must end with exit code 130, one line on stderr and no traceback.

    python scripts/kill_test.py                     # 60 kills of a 200,000-pipe audit
    python scripts/kill_test.py --kills 10 --pipes 20000

It prints a table of the kills by outcome and exits 1 if any kill left a mixture or a partial set.
"""

from __future__ import annotations

import argparse
import hashlib
import importlib.util
import json
import signal
import subprocess
import sys
import tempfile
import time
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import pyogrio

ROOT = Path(__file__).resolve().parent.parent
OUTPUTS = ("audit.gpkg", "summary.json", "candidates.csv", "report.html")


def _bench() -> object:
    spec = importlib.util.spec_from_file_location("bench_for_kill_test", ROOT / "scripts" / "bench.py")
    assert spec is not None
    assert spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


@dataclass(frozen=True)
class Kill:
    """One kill: the signal, after how long [s], what the run returned and what the folder held."""

    signal: str
    delay_s: float
    returncode: int
    outcome: str  # "earlier output", "new output", "mixture", "partial set", "no output"
    stderr: str


def digest(folder: Path) -> dict[str, str]:
    """SHA-256 of every file in the output folder, by name."""
    return {path.name: hashlib.sha256(path.read_bytes()).hexdigest() for path in sorted(folder.iterdir()) if path.is_file()}


def run_command(config: Path, out: Path) -> list[str]:
    return [sys.executable, "-c", "import sys, audit.cli; sys.exit(audit.cli.main(sys.argv[1:]))", "run", str(config), "-o", str(out),
            "--overwrite", "-q"]  # fmt: skip


def outcome(out: Path, earlier: dict[str, str]) -> str:
    """What the folder holds: the earlier output, a complete new one, a mixture or a partial set."""
    if not out.exists():
        return "no output"
    now = digest(out)
    if now == earlier:
        return "earlier output"
    if set(now) != set(earlier):
        return "partial set"
    # a new complete output: the summary and the report carry one run's time stamp, the GeoPackage
    # opens whole, the candidates are those of the same network
    created = json.loads((out / "summary.json").read_text(encoding="utf-8"))["created_utc"].replace("T", " ").rstrip("Z")
    page = (out / "report.html").read_text(encoding="utf-8")
    layers = {str(name) for name, _ in pyogrio.list_layers(out / "audit.gpkg")}
    if f"{created} UTC" not in page or now["candidates.csv"] != earlier["candidates.csv"] or not {"pipes", "manholes", "findings"} <= layers:
        return "mixture"
    return "new output"


def kill_once(config: Path, out: Path, earlier: dict[str, str], *, delay_s: float, sig: signal.Signals) -> Kill:
    process = subprocess.Popen(run_command(config, out), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    time.sleep(delay_s)
    process.send_signal(sig)
    _, stderr = process.communicate(timeout=600)
    return Kill(sig.name, delay_s, process.returncode, outcome(out, earlier), stderr)


def kill_test(*, pipes: int, kills: int, seed: int, workdir: Path) -> tuple[list[Kill], list[str]]:
    """Audit, then kill ``kills`` runs at moments spread over a run; return the kills and what was left beside."""
    bench = _bench()
    config = bench.write_network(pipes, workdir, seed=seed)  # type: ignore[attr-defined]
    out = workdir / "out"
    start = time.perf_counter()
    subprocess.run([*run_command(config, out)], check=True)
    length = time.perf_counter() - start
    earlier = digest(out)
    found = []
    for number in range(kills):
        delay = length * (0.05 + 1.1 * (number + 0.5) / kills)  # from the start of a run to just past its end
        sig = signal.SIGINT if number % 3 == 2 else signal.SIGKILL
        kill = kill_once(config, out, earlier, delay_s=delay, sig=sig)
        found.append(kill)
        if kill.outcome == "new output":
            earlier = digest(out)
    subprocess.run([*run_command(config, out)], check=True)
    beside = sorted(path.name for path in workdir.iterdir() if path.name not in ("out", "net.gpkg", "net.toml"))
    return found, beside


def table(kills: Sequence[Kill], beside: Sequence[str]) -> str:
    counts = Counter((kill.signal, kill.outcome) for kill in kills)
    rows = [f"{'signal':<8} {'outcome':<16} {'kills':>5}"] + [f"{sig:<8} {what:<16} {count:>5}" for (sig, what), count in sorted(counts.items())]
    interrupted = [kill for kill in kills if kill.signal == "SIGINT" and kill.outcome == "earlier output"]
    tracebacks = sum("Traceback" in kill.stderr for kill in kills)
    bad_codes = sum(kill.returncode not in (130, 0) for kill in interrupted)
    rows.append(f"interrupts that exited other than 130: {bad_codes}; tracebacks printed: {tracebacks}")
    rows.append(f"left beside the output after one more run: {list(beside) or 'nothing'}")
    return "\n".join(rows)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=(__doc__ or "").splitlines()[0])
    parser.add_argument("--pipes", type=int, default=200_000, help="pipes in the synthetic network (default 200,000)")
    parser.add_argument("--kills", type=int, default=60, help="runs to kill (default 60)")
    parser.add_argument("--seed", type=int, default=11)
    parser.add_argument("--json", type=Path, help="also write the kills to this file")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="kill-test-") as folder:
        kills, beside = kill_test(pipes=args.pipes, kills=args.kills, seed=args.seed, workdir=Path(folder))
    print(table(kills, beside))
    if args.json:
        args.json.write_text(json.dumps([kill.__dict__ for kill in kills], indent=1), encoding="utf-8")
    failed = any(kill.outcome in ("mixture", "partial set", "no output") for kill in kills) or beside
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
