"""Example files are safe to copy."""

from __future__ import annotations

from pathlib import Path

from verirun.bench.config import load_bench
from verirun.checkfiles import check

ROOT = Path(__file__).resolve().parents[2]


class TestExampleBench:
    def test_real_bench_example_loads_and_refuses_scripted_hazardous_output(self):
        """The example for a real bench checks clean, names a real VISA library (not the
        simulator) and refuses hazardous output in a scripted run."""
        path = ROOT / "examples" / "bench-real.yaml"
        bench = load_bench(path)
        assert bench.file.safety.scripted_hazardous == "refuse"
        assert "@sim" not in bench.file.calibrator.visa_library
        assert not check([path]).failed

    def test_only_the_simulated_demo_bench_allows_scripted_hazardous_output(self):
        """Outside the demo's simulated bench (and test fixtures), no shipped file allows it."""
        allowing = sorted(
            str(p.relative_to(ROOT))
            for p in ROOT.rglob("*.yaml")
            if ".venv" not in p.relative_to(ROOT).parts
            and "tests" not in p.relative_to(ROOT).parts
            and "scripted-hazardous: allow" in p.read_text(encoding="utf-8")
        )
        assert allowing == ["verirun/demo/bench-sim.yaml"]
