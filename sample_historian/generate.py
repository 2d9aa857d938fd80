"""Generate the Calder Bank sample historian into sample_historian/generated/.

Run from anywhere:  python sample_historian/generate.py
The scenario (schedule, faults, seed) is sample_historian/scenario.toml; the plant is
config/demo_plant.toml. Output is the same, byte for byte, on every run.
"""

import time
from pathlib import Path

from kinetrace.simulator import generate_sample_historian

HERE = Path(__file__).resolve().parent

if __name__ == "__main__":
    timings: dict = {}
    t0 = time.perf_counter()
    paths = generate_sample_historian(HERE.parent / "config" / "demo_plant.toml", HERE / "generated",
                                      scenario_path=HERE / "scenario.toml", timings=timings)
    total = time.perf_counter() - t0
    for name, path in paths.items():
        print(f"{name:>14}: {path} ({path.stat().st_size / 1e6:.1f} MB)")
    for stage, seconds in timings.items():
        print(f"{stage:>24}: {seconds:6.2f} s")
    print(f"{'total':>24}: {total:6.2f} s")
