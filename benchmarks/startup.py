"""Start-up time: cold ``verirun --help`` and ``verirun check`` against a bare ``import pyvisa``.

Each command runs in a new interpreter (subprocess), timed by wall clock from launch to exit;
the figure is the median of several runs after one warm-up run of each. The commands are
interleaved so that a noisy moment on the machine hits all of them alike. The procedure checked
is a generated one of 100 points. Finally ``python -X importtime`` lists the ten imports of
``verirun check`` with the largest cumulative time.

Usage: python benchmarks/startup.py [--quick]
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import _gen  # noqa: E402

HELP_TARGET = 0.3  # seconds, wall
CHECK_FACTOR = 2.0  # check <= this times the bare import


def verirun_command() -> list[str]:
    """The venv's ``verirun`` script, or ``python -m verirun`` when there is none."""
    script = Path(sys.executable).with_name("verirun")
    return [str(script)] if script.exists() else [sys.executable, "-m", "verirun"]


def wall(command: list[str]) -> float:
    t = time.perf_counter()
    done = subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    seconds = time.perf_counter() - t
    if done.returncode != 0:
        raise SystemExit(
            f"{' '.join(command)} failed ({done.returncode}): {done.stderr.decode()[-500:]}"
        )
    return seconds


def import_times(command: list[str], top: int) -> list[tuple[int, int, str]]:
    """(cumulative us, self us, module) of the ``top`` slowest imports of ``command``."""
    if command[0] == sys.executable:
        full = [sys.executable, "-X", "importtime"] + command[1:]
    else:
        full = [sys.executable, "-X", "importtime", command[0]] + command[1:]
    done = subprocess.run(full, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    rows = []
    for line in done.stderr.splitlines():
        if not line.startswith("import time:") or "cumulative" in line:
            continue
        self_us, cumulative, name = (
            part.strip() for part in line[len("import time:") :].split("|")
        )
        rows.append((int(cumulative), int(self_us), name.strip()))
    rows.sort(reverse=True)
    return rows[:top]


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="3 runs of each instead of 7")
    args = parser.parse_args(argv)
    runs = 3 if args.quick else 7
    folder = Path(tempfile.mkdtemp(prefix="verirun-bench-startup-"))
    try:
        gen = _gen.generate(100, folder)
        verirun = verirun_command()
        commands = {
            "python -c 'import pyvisa'": [sys.executable, "-c", "import pyvisa"],
            "python -c 'pass'": [sys.executable, "-c", "pass"],
            "verirun --help": verirun + ["--help"],
            "verirun check (100 points)": verirun + ["check", str(gen.procedure)],
        }
        times: dict[str, list[float]] = {name: [] for name in commands}
        for command in commands.values():
            wall(command)  # warm-up: the .pyc files and the OS file cache
        for i in range(runs):
            for name, command in commands.items():
                times[name].append(wall(command))
        med = {name: _gen.median(values) for name, values in times.items()}
        bare = med["python -c 'import pyvisa'"]
        help_s, check_s = med["verirun --help"], med["verirun check (100 points)"]

        print(f"Cold start, wall time, median of {runs} runs (after one warm-up run each)")
        print(
            _gen.table(
                ["command", "median s", "min s", "max s"],
                [
                    [name, f"{med[name]:.3f}", f"{min(times[name]):.3f}", f"{max(times[name]):.3f}"]
                    for name in commands
                ],
            )
        )
        print()
        print(
            _gen.table(
                ["figure", "measured", "target", "ratio to target", "result"],
                [
                    [
                        "verirun --help",
                        f"{help_s:.3f} s",
                        f"<= {HELP_TARGET} s",
                        f"{help_s / HELP_TARGET:.2f}",
                        _gen.verdict(help_s <= HELP_TARGET),
                    ],
                    [
                        "verirun check / import pyvisa",
                        f"{check_s / bare:.2f}x ({check_s:.3f} s / {bare:.3f} s)",
                        f"<= {CHECK_FACTOR}x",
                        f"{check_s / bare / CHECK_FACTOR:.2f}",
                        _gen.verdict(check_s <= CHECK_FACTOR * bare),
                    ],
                ],
            )
        )

        print(
            "\nTop 10 imports of 'verirun check' by cumulative time (python -X importtime, one run)"
        )
        rows = import_times(verirun + ["check", str(gen.procedure)], 10)
        print(
            _gen.table(
                ["module", "cumulative ms", "self ms"],
                [[name, f"{cum / 1000:.1f}", f"{own / 1000:.1f}"] for cum, own, name in rows],
            )
        )
        print("\nTop 10 imports of 'verirun --help' by cumulative time")
        rows = import_times(verirun + ["--help"], 10)
        print(
            _gen.table(
                ["module", "cumulative ms", "self ms"],
                [[name, f"{cum / 1000:.1f}", f"{own / 1000:.1f}"] for cum, own, name in rows],
            )
        )
        return 0
    finally:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
