"""Write one set of the stored runs of this folder again, from the demo scenario, with the verirun
installed.

Each set is named for the journal format it was written in (``format1-*`` by verirun 0.1.0,
``format3-*`` by the verirun that introduced journal format 3, record format 3 and certificate
template 3). Write a set again only when the demo scenario itself changes (its procedure, bench
or scripted readings), and only while the installed verirun writes the formats the set is named
for: the stored runs are there to catch a change of format, and writing them again with a
verirun whose formats differ would hide exactly that. The ``format1`` set can no longer be
written (verirun writes format 3): it stays as 0.1.0 wrote it.

    python tests/data/stored-runs/regenerate.py format3

Each run is made with the command line, as a user would make it, in a scratch folder; its
journal, record(s), simulated calibrator file and certificate(s) are then copied here.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[2]
PROCEDURE = ROOT / "procedures" / "qm40-analog-multimeter.yaml"
BENCH = ROOT / "verirun" / "demo" / "bench-sim.yaml"
READINGS = ROOT / "tests" / "data" / "qm40-readings.csv"
COMMON = ["--bench", "bench-sim.yaml", "--simulate", "--customer", "Stored Run Customer",
          "--received", "2026-11-30", "--temperature", "23.1", "--humidity", "45",
          "--runs", "runs", "--reports", "reports"]


def verirun(*args: str, expect: int = 0) -> None:
    code = subprocess.call([sys.executable, "-m", "verirun", *args], stdout=subprocess.DEVNULL)
    if code != expect:
        raise SystemExit(f"verirun {' '.join(args)}: exit {code}, expected {expect}")


def newest_run(work: Path) -> Path:
    return max((work / "runs").iterdir(), key=lambda p: p.stat().st_mtime_ns)


def readings(work: Path, name: str, *replacements: tuple[str, str]) -> str:
    text = READINGS.read_text(encoding="utf-8")
    for old, new in replacements:
        if old not in text:
            raise SystemExit(f"{READINGS}: no line {old!r}")
        text = text.replace(old, new)
    (work / name).write_text(text, encoding="utf-8")
    return name


SET = "format3"


def keep(run: Path, name: str) -> None:
    """Copy the run's files and its certificates to ``<set>-<name>``."""
    target = HERE / f"{SET}-{name}"
    shutil.rmtree(target, ignore_errors=True)
    (target / "certificate").mkdir(parents=True)
    for file in ("journal.jsonl", "record.json", "record.r1.json"):
        if (run / file).is_file():
            shutil.copy2(run / file, target / file)
    shutil.copytree(run / "simulated-calibrator", target / "simulated-calibrator")
    uid = run.name.rsplit("-", 1)[-1].upper()
    for cert in sorted((run.parent.parent / "reports").glob(f"*-{uid}*.html")):
        shutil.copy2(cert, target / "certificate" / cert.name)


def main() -> None:
    from verirun.record.documents import JOURNAL_FORMAT

    if sys.argv[1:] != [SET] or JOURNAL_FORMAT != 3:
        raise SystemExit(f"usage: regenerate.py {SET} (with a verirun that writes journal format 3)")
    with tempfile.TemporaryDirectory() as scratch:
        work = Path(scratch)
        shutil.copy2(PROCEDURE, work / "qm40-analog-multimeter.yaml")
        shutil.copy2(BENCH, work / "bench-sim.yaml")
        shutil.copy2(READINGS, work / "readings.csv")
        text = PROCEDURE.read_text(encoding="utf-8")
        os.chdir(work)

        verirun("run", "qm40-analog-multimeter.yaml", "--readings", "readings.csv", "--serial", "SR-simple", *COMMON)
        keep(newest_run(work), "simple")
        for rule in ("guarded", "non-binary", "risk"):
            (work / f"proc-{rule}.yaml").write_text(text.replace("rule: simple", f"rule: {rule}"), encoding="utf-8")
            verirun("run", f"proc-{rule}.yaml", "--readings", "readings.csv", "--serial", f"SR-{rule}", *COMMON)
            keep(newest_run(work), rule)

        aborting = readings(work, "abort.csv", ("dcv-30,15 V,15\n", "dcv-30,15 V,abort\n"))
        verirun("run", "qm40-analog-multimeter.yaml", "--readings", aborting, "--serial", "SR-resumed", *COMMON,
                expect=2)
        run = newest_run(work)
        verirun("resume", str(run), "--readings", "readings.csv", "--reports", "reports")
        keep(run, "resumed")

        verirun("run", "qm40-analog-multimeter.yaml", "--readings", "readings.csv", "--serial", "SR-amended", *COMMON)
        amended = newest_run(work)
        verirun("amend", str(amended), "--point", "16", "--reading", "15.5", "--reason",
                "transcription error: 15.5 was read, 15 typed", "--operator", "A. Tester", "--reports", "reports")
        keep(amended, "amended")

        after = readings(work, "as-left.csv", ("ohm-x1k,16 kohm,18.5 kΩ\n", "ohm-x1k,16 kohm,16.5 kΩ\n"))
        verirun("run", "qm40-analog-multimeter.yaml", "--readings", after, "--serial", "SR-amended", *COMMON,
                "--as-left-of", str(amended), "--adjustment", "×1k ohms range resistor trimmed")
        keep(newest_run(work), "asleft")

        skipping = readings(work, "skip.csv", ("dcv-6,3.6 V,3.75\n", "dcv-6,3.6 V,note pointer sticks near 3.6 V\n"
                                                                     "dcv-6,3.6 V,3.75\n"),
                            ("dcv-30,30 V,30.75\n", "dcv-30,30 V,skip test lead insulation cracked\n"))
        verirun("run", "qm40-analog-multimeter.yaml", "--readings", skipping, "--serial", "SR-skipped", *COMMON)
        keep(newest_run(work), "skipped")


if __name__ == "__main__":
    main()
