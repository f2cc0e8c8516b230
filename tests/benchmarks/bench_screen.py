"""Screening speed: one worker against a process pool, on generated structures of mixed families.

Writes ``--structures`` files (default 1000; CIF and POSCAR, the families of
tests/screening_folder.py with lattice constants scaled within ±3 %) into a
temporary folder, then screens them with faces to ``--max-index`` (default 3)
and the polarity of every termination (reconstruction cells up to the default
max cell), exactly as ``termination screen FOLDER --workers N`` does:

- once in this process (``--workers 1``), and
- once on a process pool of ``--workers`` processes (default 2), the pool's
  start-up included.

It prints the wall time of each run, the cost per structure, the CPU time
of the work (this process for the first run, the pool's processes for the
others), the speed-up, and checks that the runs gave the same rows.  The
machine's load average is printed before each run: other programs running at
the same time take cores from the pool, so the speed-up is meaningful only on
an otherwise idle machine (load average well below 1 before the runs; the
script warns when it exceeds the number of workers).  The CPU time shows
that the pool does the same work as one process, and the parallel efficiency
CPU / (workers x wall) how much of the cores it got.  The acceptance figure of the
screening issue is a speed-up of at least 1.8 with two workers on the 2-core
machine.  ``--dask`` adds a run on a local Dask cluster of ``--workers``
processes (start-up included), the same code path as ``--scheduler``.

Run:  python tests/benchmarks/bench_screen.py [--structures 1000] [--workers 2] [--dask]
"""

import argparse
import concurrent.futures as cf
import os
import resource
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
sys.path.insert(0, ROOT)
sys.path.insert(0, os.path.dirname(HERE))

from screening_folder import write_structure_folder  # noqa: E402

from termination.screening import screen  # noqa: E402


def _cpu():
    """CPU seconds of this process and of its finished child processes."""
    me = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return me.ru_utime + me.ru_stime, kids.ru_utime + kids.ru_stime


def timed(label, fn, workers=1):
    load = os.getloadavg()[0]
    start, (self0, kids0) = time.perf_counter(), _cpu()
    report = fn()
    wall = time.perf_counter() - start
    self1, kids1 = _cpu()
    cpu = (self1 - self0) + (kids1 - kids0)
    print(
        f"{label:<28} {wall:8.1f} s wall  {wall / report.screened * 1000:6.1f} ms per structure  "
        f"CPU {cpu:7.1f} s  efficiency {cpu / (workers * wall):4.0%}  (load before {load:.2f})"
    )
    return wall, report


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--structures", type=int, default=1000)
    parser.add_argument("--max-index", type=int, default=3)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--dask", action="store_true", help="also run on a local Dask cluster")
    args = parser.parse_args()
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    print(f"{args.structures} structures, faces to index {args.max_index} with polarity; {cores} cores")
    with tempfile.TemporaryDirectory() as folder:
        write_structure_folder(folder, args.structures, corrupt=0, seed=17)
        serial_wall, serial = timed("1 worker (in process)", lambda: screen([folder], max_index=args.max_index))

        def pool_run():
            with cf.ProcessPoolExecutor(max_workers=args.workers) as pool:
                return screen([folder], max_index=args.max_index, executor=pool)

        pool_wall, pooled = timed(f"{args.workers} workers (process pool)", pool_run, args.workers)
        assert pooled.results == serial.results, "the process pool gave other rows"
        print(f"speed-up with {args.workers} workers: {serial_wall / pool_wall:.2f}x")
        if os.getloadavg()[0] > args.workers + 0.5:
            print(f"load average {os.getloadavg()[0]:.2f}: other programs shared the cores; the speed-up is not clean")
        if args.dask:
            import distributed

            def dask_run():
                with (
                    distributed.LocalCluster(
                        n_workers=args.workers, threads_per_worker=1, processes=True, dashboard_address=None
                    ) as cluster,
                    distributed.Client(cluster) as client,
                ):
                    return screen([folder], max_index=args.max_index, executor=client.get_executor())

            dask_wall, on_dask = timed(f"{args.workers} Dask workers (local)", dask_run, args.workers)
            assert on_dask.results == serial.results, "the Dask cluster gave other rows"
            print(f"speed-up on Dask with {args.workers} workers: {serial_wall / dask_wall:.2f}x")


if __name__ == "__main__":
    main()
