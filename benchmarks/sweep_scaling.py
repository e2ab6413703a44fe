"""Sweep scaling: throughput with 1 and 2 local workers, dask.distributed against the local pool, peak memory.

Run by hand (never from the tests), on an otherwise idle machine for meaningful ratios:

    python benchmarks/sweep_scaling.py [--cases N] [--points N] [--memory-points N] [--repeat N]

Every configuration runs the same job of Fe-C cases (bundled database; two thermo systems: with and without
graphite) from fresh worker processes, so each time includes starting the workers and building their systems.
The configurations are run side by side in one process, interleaved, `--repeat` times; the best time of each
is kept, and the ratios are printed:

* speed-up of 2 local workers over 1 (target >= 1.6 on 2 cores);
* time on a dask LocalCluster (2 worker processes, 1 thread each, started beforehand and with the modules
  imported that the local pool's fork server preloads) over the local pool with 2 workers (target <= 1.3);
* peak memory of a 2-worker sweep of `--memory-points` (case, temperature) points: the largest sum of the
  resident set sizes of the worker processes, sampled from /proc every 0.1 s, and the main process's own peak
  (VmHWM).

CPU seconds of the worker processes are printed beside each time (from /proc), with the load average, so that a
machine shared with other work can be told apart from poor scaling.
"""

from __future__ import annotations

import argparse
import os
import threading
import time
from pathlib import Path

import numpy as np

from solubility.sweeps import Case, sweep

TICK = os.sysconf("SC_CLK_TCK")
PAGE_KB = os.sysconf("SC_PAGE_SIZE") // 1024


def make_cases(n_cases: int, n_points: int) -> list[Case]:
    """`n_cases` solvus lines of C in ferrite and austenite, stable and metastable, `n_points` temperatures each.

    Windows are shifted from case to case so that no two cases are the same calculation.
    """
    cases = []
    for i in range(n_cases):
        phase, lo, hi = ("BCC_A2", 700.0, 980.0) if i % 2 == 0 else ("FCC_A1", 1050.0, 1400.0)
        exclude = ("GRAPHITE", "DIAMOND_A4") if (i // 2) % 2 else ()
        shift = (i // 4) * 0.37
        T = np.round(np.linspace(lo + shift, hi + shift, n_points), 6)
        cases.append(Case(name=f"c{i:04d}", database="fe-c", phase=phase, solute="C", temperatures=list(T),
                          exclude=exclude))
    return cases


def _descendants(root: int) -> list[tuple[int, int]]:
    parent: dict[int, int] = {}
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/stat") as fh:
                    fields = fh.read().rsplit(")", 1)[1].split()
                parent[int(entry)] = int(fields[1])
            except (OSError, IndexError, ValueError):
                continue
    out, frontier = [], [root]
    while frontier:
        pid = frontier.pop()
        kids = [p for p, pp in parent.items() if pp == pid]
        out.extend((k, pid) for k in kids)
        frontier.extend(kids)
    return out


def _helper(pid: int, ppid: int) -> bool:
    """True for multiprocessing's helper processes (fork server, resource tracker): not workers.

    They are children of this process; the workers forked by the fork server share its command line.
    """
    if ppid != os.getpid():
        return False
    try:
        cmdline = Path(f"/proc/{pid}/cmdline").read_bytes()
    except OSError:
        return True
    return b"forkserver" in cmdline or b"resource_tracker" in cmdline


def _proc_stat(pid: int) -> tuple[int, float]:
    """(resident set in kB, CPU seconds) of a process."""
    with open(f"/proc/{pid}/stat") as fh:
        fields = fh.read().rsplit(")", 1)[1].split()
    cpu = (int(fields[11]) + int(fields[12])) / TICK
    rss_kb = int(fields[21]) * PAGE_KB
    return rss_kb, cpu


class Sampler:
    """Samples the descendants of this process: the peak of the sum of their RSS, and their CPU seconds."""

    def __init__(self, interval: float = 0.1) -> None:
        self.interval = interval
        self.peak_kb = 0
        self.cpu: dict[int, float] = {}
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _run(self) -> None:
        while not self._stop.is_set():
            total = 0
            for pid, ppid in _descendants(os.getpid()):
                if _helper(pid, ppid):
                    continue
                try:
                    rss, cpu = _proc_stat(pid)
                except OSError:
                    continue
                total += rss
                self.cpu[pid] = max(cpu, self.cpu.get(pid, 0.0))
            self.peak_kb = max(self.peak_kb, total)
            self._stop.wait(self.interval)

    def __enter__(self) -> Sampler:
        self._thread.start()
        return self

    def __exit__(self, *exc) -> None:
        self._stop.set()
        self._thread.join()

    @property
    def cpu_seconds(self) -> float:
        return sum(self.cpu.values())


def _preload() -> None:
    import importlib

    from solubility.sweeps.run import PRELOAD

    for name in PRELOAD:
        importlib.import_module(name)


def timed(cases: list[Case], **kwargs) -> tuple[float, float, int, list[str]]:
    """(wall seconds, worker CPU seconds, peak sum of worker RSS in kB, case statuses) of one sweep."""
    with Sampler() as sampler:
        start = time.perf_counter()
        ds = sweep(cases, **kwargs)
        wall = time.perf_counter() - start
    return wall, sampler.cpu_seconds, sampler.peak_kb, ds["case_status"].values.tolist()


def _vm_hwm_kb() -> int:
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1])
    return 0


def scaling(cases: list[Case], repeat: int) -> dict[str, tuple[float, float]]:
    from distributed import Client, LocalCluster

    sweep(cases[:1], workers=1)  # start the fork server (once per process) before anything is timed
    best: dict[str, tuple[float, float]] = {}
    n_points = sum(len(c.temperatures) for c in cases)
    for r in range(repeat):
        for label, kwargs in (("local, 1 worker", {"workers": 1}), ("local, 2 workers", {"workers": 2})):
            wall, cpu, _, status = timed(cases, **kwargs)
            print(f"  run {r + 1}: {label:18s} {wall:7.1f} s  ({n_points / wall:6.1f} points/s, "
                  f"workers' CPU {cpu:6.1f} s, {status.count('ok')}/{len(status)} ok)", flush=True)
            best[label] = min(best.get(label, (np.inf, 0.0)), (wall, cpu))
        start = time.perf_counter()
        cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0")
        with Client(cluster) as client:  # import what the local pool's fork server has preloaded, as a
            client.run(_preload)  # long-lived cluster would have: the imports are not part of a sweep
        up = time.perf_counter() - start
        try:
            wall, cpu, _, status = timed(cases, scheduler=cluster)
        finally:
            cluster.close()
        label = "dask, 2 workers"
        print(f"  run {r + 1}: {label:18s} {wall:7.1f} s  ({n_points / wall:6.1f} points/s, "
              f"workers' CPU {cpu:6.1f} s, {status.count('ok')}/{len(status)} ok; cluster start and imports "
              f"{up:.1f} s not counted)", flush=True)
        best[label] = min(best.get(label, (np.inf, 0.0)), (wall, cpu))
    return best


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=80, help="cases of the scaling job")
    parser.add_argument("--points", type=int, default=250, help="temperatures per case of the scaling job")
    parser.add_argument("--memory-points", type=int, default=10_000, help="(case, T) points of the memory run")
    parser.add_argument("--repeat", type=int, default=2, help="interleaved repetitions of each configuration")
    args = parser.parse_args(argv)

    print(f"machine: {os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.2f} at the start", flush=True)
    cases = make_cases(args.cases, args.points)
    n_points = sum(len(c.temperatures) for c in cases)
    print(f"scaling job: {len(cases)} cases x {args.points} temperatures = {n_points} points, 2 thermo systems")
    best = scaling(cases, args.repeat)
    one, two, dask = best["local, 1 worker"][0], best["local, 2 workers"][0], best["dask, 2 workers"][0]
    print(f"speed-up, 2 local workers over 1:  {one / two:.2f}x  (target >= 1.6)")
    print(f"dask LocalCluster / local pool:    {dask / two:.2f}x  (target <= 1.3)")

    per_case = 100
    n_cases = max(1, args.memory_points // per_case)
    big = make_cases(n_cases, per_case)
    wall, cpu, peak_kb, status = timed(big, workers=2)
    print(f"memory run: workers' CPU {cpu:.1f} s")
    print(f"memory run: {n_cases} cases x {per_case} temperatures = {n_cases * per_case} points, 2 workers: "
          f"{wall:.1f} s, {status.count('ok')}/{len(status)} ok")
    print(f"peak memory: workers' RSS summed {peak_kb / 1024:.0f} MiB; main process peak (VmHWM) "
          f"{_vm_hwm_kb() / 1024:.0f} MiB")
    print(f"load average {os.getloadavg()[0]:.2f} at the end", flush=True)
    return 0


if __name__ == "__main__":  # required: worker processes import this file again
    raise SystemExit(main())
