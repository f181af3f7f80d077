"""Benchmark of outline plates by finite elements (issue 17): the first 200 modes "in seconds, not minutes".

A free steel plate 2 mm thick of a four-sided outline (0.5 x ~0.33 m), solved from scratch (the
in-process cache cleared) for 200 elastic modes, best of `--repeats`; the mesh refinement loop
included.  Run from the repository root:

    .venv/bin/python benchmarks/fe.py              # or: PYTHONPATH=. python benchmarks/fe.py
"""
from __future__ import annotations

import argparse
import os
import sys
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

from synth.materials import MATERIALS  # noqa: E402
from synth.resonators.fe import core, plate_fe  # noqa: E402

TARGET_S = 60.0  # "seconds, not minutes": the bound this figure is read against


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--modes", type=int, default=200)
    parser.add_argument("--repeats", type=int, default=2)
    args = parser.parse_args()
    spec = plate_fe.build_spec({"points": [[0, 0], [0.5, 0], [0.45, 0.3], [0.05, 0.35]], "holes": None,
                                "edges": "free", "hole_edges": None, "svg_path": None, "svg_unit": 1e-3,
                                "thickness": 2e-3, "pitch": None, "material": MATERIALS["steel"]})
    times = []
    for _ in range(args.repeats):
        core._CACHE.clear()
        start = time.perf_counter()
        solution = plate_fe.solve(spec, args.modes)
        times.append(time.perf_counter() - start)
    p = solution.parameters
    print(f"{len(solution.frequency_hz)} modes of a free outline plate: best {min(times):.1f} s of {args.repeats} "
          f"(all: {', '.join(f'{t:.1f}' for t in times)}); bound {TARGET_S:.0f} s = {min(times) / TARGET_S:.2f} of it")
    print(f"{p['mesh_elements']} triangles, {p['mesh_dofs']} dofs, error estimate of the highest mode "
          f"{p['mesh_error_highest_mode']:.2e}")


if __name__ == "__main__":
    main()
