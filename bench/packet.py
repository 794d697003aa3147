"""Benchmark: the demo packet as users make it, with the `buildsheet` command in a fresh process.

Prints, for `buildsheet demo` and `buildsheet check` on the demo spec: median and best wall time
over several runs and the peak memory of the process, once in the default environment and once
with one BLAS thread everywhere (OPENBLAS_NUM_THREADS=1 and friends); then the impedance-matrix
fills of one demo build and how many of them repeat a mesh and frequency already filled.

Targets (the as-built ledger issue) on the 2-core machine: demo packet under 2 s and 250 MB,
0 repeated fills. The machine's load average is printed: on a busy machine wall times grow.
Run: python bench/packet.py [runs]
"""

from __future__ import annotations

import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

ONE_THREAD = {k: "1" for k in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")}


def command() -> list[str]:
    """The installed `buildsheet` command (as users run it)."""
    exe = shutil.which("buildsheet") or str(Path(sys.executable).with_name("buildsheet"))
    return [exe]


def run_once(args: list[str], env: dict[str, str], cwd: Path) -> tuple[float, float]:
    """Wall time (s) and peak resident memory (MB) of one fresh process."""
    t = time.perf_counter()
    proc = subprocess.Popen(args, cwd=cwd, env=env, stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(args)} failed: {proc.stderr.read().decode()}")
    return wall, usage.ru_maxrss / 1024


def timed(name: str, make_args, runs: int, extra_env: dict[str, str]) -> None:
    env = {**os.environ, **extra_env}
    walls, mems = [], []
    with tempfile.TemporaryDirectory() as tmp:
        for i in range(runs):
            walls_mem = run_once(make_args(Path(tmp), i), env, Path(tmp))
            walls.append(walls_mem[0])
            mems.append(walls_mem[1])
    print(f"  {name:34s} median {statistics.median(walls):5.2f} s, best {min(walls):5.2f} s, "
          f"peak {max(mems):4.0f} MB  ({runs} runs)")


def fills() -> tuple[int, int]:
    """Impedance-matrix fills of one demo build, and how many repeat a mesh and frequency
    already filled, counted outside the solver context (tests/fill_count.py)."""
    from fill_count import counted_fills

    from buildsheet.build import build
    from buildsheet.cli.main import demo_spec_text

    with tempfile.TemporaryDirectory() as tmp, counted_fills() as seen:
        spec = Path(tmp) / "demo.toml"
        spec.write_text(demo_spec_text(), encoding="utf-8")
        build(spec, Path(tmp) / "out", built_at="2027-03-01T00:00:00Z")
    return sum(seen.values()), sum(n - 1 for n in seen.values())


def main() -> None:
    runs = int(sys.argv[1]) if len(sys.argv) > 1 else 5
    exe = command()
    print(f"buildsheet in a fresh process, {os.cpu_count()} cores, load average "
          + " ".join(f"{x:.1f}" for x in os.getloadavg()))

    def demo(tmp: Path, i: int) -> list[str]:
        return [*exe, "demo", "-o", str(tmp / f"out{i}"), "--spec-dir", str(tmp / f"spec{i}")]

    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run([*exe, "demo", "-o", f"{tmp}/out", "--spec-dir", tmp], check=True,
                       stdout=subprocess.DEVNULL)
        spec = str(Path(tmp) / "demo.toml")
        for label, env in (("default BLAS threads", {}), ("one BLAS thread", ONE_THREAD)):
            print(f"{label}:")
            timed("buildsheet demo (target < 2 s)", demo, runs, env)
            timed("buildsheet check demo.toml", lambda _t, _i: [*exe, "check", spec], runs, env)
    n, repeats = fills()
    print(f"impedance-matrix fills per demo build: {n}, repeated: {repeats} (target 0)")


if __name__ == "__main__":
    main()
