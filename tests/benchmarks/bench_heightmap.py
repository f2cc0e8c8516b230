"""Acceptance figures of the height-map analysis (not a test; run by hand, takes a few minutes).

    python tests/benchmarks/bench_heightmap.py                  # all three parts
    python tests/benchmarks/bench_heightmap.py time --runs 5    # 2048 x 2048 wall time
    python tests/benchmarks/bench_heightmap.py memory --size 4096
    python tests/benchmarks/bench_heightmap.py accuracy --maps 20

*time*: median wall time of :func:`termination.imaging.analysis.analyse_heightmap`
on a 2048 x 2048 synthetic topograph with every artifact of a raw image (six
1.48 Å steps with meandering edges and corner pieces, line offsets 0.5 Å rms,
adsorbates and pits over 5 %, a 0.2 Å rms 1/f background, lateral shifts, a
3.9 Å square corrugation, 0.05 Å noise, 0.25 Å pixels).

*memory*: peak resident memory of ``termination image FILE --json`` (the
whole command: reading, analysis, output) on such a map of 4096 x 4096 pixels
stored as a float64 .npy, measured in a child process (its ``VmHWM``).

*accuracy*: maps with all the artifacts at the acceptance levels (line
offsets up to 0.5 Å rms, adsorbates and pits over 5 %, 0.2 Å rms background,
meandering and bunched edges, corner pieces of 300-600 px, lateral shifts)
and random tilt, azimuth, lattice (square or hexagonal, 2.5-4.5 Å) and step
height (1.2-3 Å); counts how many reported values are within the tolerances
(steps 5 %, tilt 0.3°, lattice 2 % and 1°) and within 3 of their sigmas.
"""

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from termination.imaging.analysis import analyse_heightmap  # noqa: E402
from termination.testing import synthetic_heightmap  # noqa: E402

ARTIFACTS = dict(
    line_offset_angstrom=0.5,
    adsorbate_fraction=0.05,
    background_angstrom=0.2,
    lateral_shifts=True,
)


def realistic_map(size, seed=0):
    return synthetic_heightmap(
        (size, size),
        0.25,
        tilt_deg=3.0,
        azimuth_deg=20.0,
        step_heights=[1.48] * 6,
        step_azimuth_deg=15.0,
        meander_angstrom=30.0,
        corner_pieces=[(0, 300, 1.48), (3, 2000, -1.48)],
        lattice=(3.9, 3.9, 90.0, 10.0),
        corrugation_angstrom=0.1,
        noise_angstrom=0.05,
        background_scale_px=size / 8,
        seed=seed,
        **ARTIFACTS,
    )


def bench_time(runs, size):
    z = realistic_map(size)
    load = os.getloadavg()[0]
    times, cpu = [], []
    for _ in range(runs):
        t0, c0 = time.perf_counter(), time.process_time()
        r = analyse_heightmap(z, 0.25)
        times.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    print(
        f"time {size}x{size} with every artifact: median {statistics.median(times):.2f} s over {runs} runs "
        f"(min {min(times):.2f} s, max {max(times):.2f} s; CPU time {statistics.median(cpu):.2f} s); "
        f"load average {load:.1f} before the runs"
    )
    lat = r.lattice
    print(
        f"  terrace tilt {r.tilt.terrace:.3f} ± {r.tilt.terrace_sigma:.3f}° (true 3), lattice {lat.a:.4f} x "
        f"{lat.b:.4f} Å, γ {lat.gamma:.2f}° (true 3.9, 90), steps "
        + ", ".join(f"{s.height:.3f}±{s.sigma:.3f}" for s in r.steps)
        + " Å (true 1.48)"
    )


CHILD = """
import sys
sys.path.insert(0, {root!r})
from termination.cli import main
sys.argv = ["termination", "image", {path!r}, "--pixel-size", "0.25A", "--z-unit", "A", "--json"]
try:
    main()
except SystemExit:
    pass
# VmHWM is the peak of this process image (ru_maxrss would include the parent's peak before exec)
peak = next(line for line in open("/proc/self/status") if line.startswith("VmHWM"))
print("PEAK", int(peak.split()[1]), file=sys.stderr)
"""


def bench_memory(size):
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / f"map{size}.npy"
        np.save(path, realistic_map(size))
        t0 = time.perf_counter()
        out = subprocess.run(
            [sys.executable, "-c", CHILD.format(root=str(ROOT), path=str(path))],
            capture_output=True,
            text=True,
            check=False,
        )
        elapsed = time.perf_counter() - t0
    peak = next(int(line.split()[1]) for line in out.stderr.splitlines() if line.startswith("PEAK"))
    print(
        f"memory {size}x{size} (`termination image --json`, map {size * size * 8 / 2**20:.0f} MiB as float64): "
        f"peak {peak / 2**20:.2f} GiB, {elapsed:.1f} s"
    )


def bench_accuracy(maps, size):
    ok = {"tilt": [0, 0], "lattice": [0, 0], "steps": [0, 0]}
    worst = {"tilt": 0.0, "a": 0.0, "gamma": 0.0, "step": 0.0}
    for seed in range(maps):
        rng = np.random.default_rng(1000 + seed)
        hexagonal = seed % 2 == 0
        a = rng.uniform(2.5, 4.5)
        lattice = (a, a, 60.0 if hexagonal else 90.0, rng.uniform(0, 180))
        gamma = 120.0 if hexagonal else 90.0
        tilt = rng.uniform(0.5, 10.0)
        h = rng.uniform(1.2, 3.0)
        px = a / rng.uniform(6.0, 10.0)
        z = synthetic_heightmap(
            (size, size),
            px,
            tilt_deg=tilt,
            azimuth_deg=rng.uniform(0, 360),
            step_heights=[h] * 3,
            step_azimuth_deg=rng.uniform(0, 360),
            step_positions=[0.3, 0.36, 0.7],
            meander_angstrom=4 * px,
            corner_pieces=[(int(rng.integers(4)), 300, h), (int(rng.integers(4)), 600, -h)],
            lattice=lattice,
            corrugation_angstrom=0.1,
            noise_angstrom=0.05,
            seed=seed,
            **ARTIFACTS,
        )
        r = analyse_heightmap(z, px)
        t = r.tilt
        ok["tilt"][1] += 1
        if t.terrace is not None:
            err = abs(t.terrace - tilt)
            worst["tilt"] = max(worst["tilt"], err)
            ok["tilt"][0] += err <= 0.3 and err <= 3 * t.terrace_sigma
        ok["lattice"][1] += 1
        lat = r.lattice
        if lat is not None:
            ea = max(abs(lat.a - a), abs(lat.b - a))
            eg = abs(lat.gamma - gamma)
            worst["a"] = max(worst["a"], ea / a)
            worst["gamma"] = max(worst["gamma"], eg)
            ok["lattice"][0] += (
                ea <= 0.02 * a
                and eg <= 1.0
                and abs(lat.a - a) <= 3 * lat.sigma_a
                and abs(lat.b - a) <= 3 * lat.sigma_b
                and eg <= 3 * lat.sigma_gamma
            )
        for s in r.steps:
            ok["steps"][1] += 1
            worst["step"] = max(worst["step"], abs(s.height - h) / h)
            good = abs(s.height - h) <= 0.05 * h and abs(s.height - h) <= 3 * s.sigma
            ok["steps"][0] += good
            if not good:
                print(f"  map {seed}: step {s.height:.3f} ± {s.sigma:.3f} Å, true {h:.3f} Å")
        if not r.steps:
            ok["steps"][1] += 1
    print(f"accuracy on {maps} maps of {size}x{size} with every artifact:")
    for key, (good, total) in ok.items():
        print(f"  {key}: {good}/{total} within tolerance and 3 sigma")
    print(
        f"  worst errors: tilt {worst['tilt']:.3f}°, lattice {100 * worst['a']:.2f} %, γ {worst['gamma']:.2f}°, "
        f"steps {100 * worst['step']:.2f} %"
    )


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("part", nargs="?", choices=["time", "memory", "accuracy", "all"], default="all")
    parser.add_argument("--runs", type=int, default=5)
    parser.add_argument("--size", type=int, default=None)
    parser.add_argument("--maps", type=int, default=20)
    args = parser.parse_args()
    if args.part in ("time", "all"):
        bench_time(args.runs, args.size or 2048)
    if args.part in ("memory", "all"):
        bench_memory(args.size or 4096)
    if args.part in ("accuracy", "all"):
        bench_accuracy(args.maps, args.size or 512)


if __name__ == "__main__":
    main()
