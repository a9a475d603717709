"""Time ``decide report`` end to end on the bundled normal-test scenario, full and --quick.

Run as ``python benchmarks/bench_report.py``; it prints the median wall-clock
time of three runs of each, as a fresh process (imports included, as a user
would see it), beside its target, with their ratio.  No timing is asserted
anywhere.  Targets: a full report under 10 s, a ``--quick`` draft under 3 s,
``decide --help`` for comparison (no matplotlib, no jinja2 imported).
"""

from __future__ import annotations

import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
SCENARIO = REPO / "scenarios" / "mill-dust-uncertain.toml"
CALL = "import sys; from decide.cli import main; sys.argv[0] = 'decide'; main()"


def wall(args: list[str], repeats: int = 3) -> tuple[float, float]:
    """Median wall-clock and CPU seconds (user + system, of the child) of ``repeats`` runs."""
    times, cpus = [], []
    for _ in range(repeats):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        start = time.perf_counter()
        subprocess.run([sys.executable, "-c", CALL, *args], check=True, capture_output=True)
        times.append(time.perf_counter() - start)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpus.append(after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime)
    return statistics.median(times), statistics.median(cpus)


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        out = str(Path(tmp) / "report.html")
        rows = [
            ("decide --help", wall(["--help"]), None),
            ("report --quick (normal test)", wall(["report", str(SCENARIO), "-o", out, "--quick", "--force"]), 3.0),
            ("report, full (normal test)", wall(["report", str(SCENARIO), "-o", out, "--seed", "1", "--force"]), 10.0),
        ]
    print(f"{'workload':<32}  {'wall s':>7}  {'cpu s':>7}  {'target s':>8}  {'ratio':>6}")
    for name, (seconds, cpu), target in rows:
        ratio = "-" if target is None else f"{seconds / target:6.2f}"
        shown = "-" if target is None else f"{target:8.2f}"
        print(f"{name:<32}  {seconds:7.2f}  {cpu:7.2f}  {shown:>8}  {ratio:>6}")


if __name__ == "__main__":
    main()
