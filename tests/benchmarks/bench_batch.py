"""Throughput and memory of ``workbench batch`` on the demo challenger (HistGradientBoosting,
16 inputs) over a large invented lending book.

Run: python tests/benchmarks/bench_batch.py [--rows N] [--background K] [--chunk-rows C]
[--repeat R] (default 1,000,000 rows; the file holds the lending book's 20 columns). It
measures, each run in a fresh child process (a Dask LocalCluster on 127.0.0.1 started by the
command), R rounds of (one worker on N rows, two workers on N rows, two workers on 2N rows),
interleaved so that a change in the machine's load hits every kind of run alike, and reports
each figure as min / median / max over the rounds with the load average around each run:

* rows per second while explaining (from the first chunk sent to the last part written, so the
  fixed costs of starting workers, drawing the background and assembling are left out) with
  one worker and with two (target: two workers >= 1.7x one worker);
* the time for twice the rows with two workers (target: at most 2x the time, + 10 %), on N and
  2N rows, or on N/2 and N with ``--double-from-half`` (half the time for a 1,000,000-row run);
* the peak resident memory of the main process (ru_maxrss of the command's own process), for
  N and 2N rows: bounded by the chunk size, so it should not grow with the rows;
* in one process with the champion (linear, fast enough for many rows): the peak for N and 2N
  rows against the peak of reading the 2N-row file whole;
* the reference in the same run: ``explain`` on 2,000 rows in one process with one numba
  thread, so the batch rate can be read as a ratio to the engine's plain call.

The machine may be shared: the figures are only comparable within one run. The workers'
processor time is reported too: on a shared machine (Linux groups a session's processes for
fair scheduling) two workers may get no more processor time than one, and the rows per
processor-second then show whether the two-worker run wastes any of it.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

MAKER = """
import sys
from demo_models.lending import generate_lending
rows = int(sys.argv[1])
_, current = generate_lending(7, n_reference=1_000, n_current=rows)
for path, n in zip(sys.argv[2::2], sys.argv[3::2]):  # the first n rows of one book
    current.iloc[:int(n)].to_parquet(path, index=False, row_group_size=100_000)
print(len(current.columns))
"""

CHILD = """
import json, resource, sys
from workbench.cli import main
code = main(sys.argv[1:])
usage = resource.getrusage(resource.RUSAGE_SELF)
print(json.dumps({"code": code, "peak_mib": usage.ru_maxrss / 1024,
                  "cpu": usage.ru_utime + usage.ru_stime}), file=sys.stderr)
"""

REFERENCE = """
import sys, time
import numba
import pandas as pd
numba.set_num_threads(1)
from demo_models.write import load_demo_model
from workbench.engine.adapter import ModelAdapter
from workbench.engine.attributions import explain, select_background
adapter = ModelAdapter(load_demo_model(sys.argv[1]))
frame = pd.read_parquet(sys.argv[2]).iloc[:2_000]
background = select_background(frame, int(sys.argv[3]), seed=0)
explain(adapter, frame.iloc[:20], background=background, background_size="all")  # compile
t = time.perf_counter()
explain(adapter, frame, background=background, background_size="all")
print(len(frame) / (time.perf_counter() - t))
"""

# The machine's own scaling: plain explain() calls in one process, then in two processes at
# once (each on one thread, started together at a given clock time), on the same rows.
CEILING = """
import sys, time
import numba
import pandas as pd
from threadpoolctl import threadpool_limits
numba.set_num_threads(1)
from demo_models.write import load_demo_model
from workbench.engine.adapter import ModelAdapter
from workbench.engine.attributions import explain, select_background
adapter = ModelAdapter(load_demo_model(sys.argv[1]))
frame = pd.read_parquet(sys.argv[2]).iloc[:int(sys.argv[4])]
background = select_background(frame, int(sys.argv[3]), seed=0)
with threadpool_limits(1):
    explain(adapter, frame.iloc[:20], background=background, background_size="all")
    time.sleep(max(0.0, float(sys.argv[5]) - time.time()))
    t = time.perf_counter()
    explain(adapter, frame, background=background, background_size="all")
print(len(frame) / (time.perf_counter() - t))
"""
CEILING_ROWS = 8_000


def machine_scaling(model: Path, data: Path, background: int, rounds: int) -> list[float]:
    """Per round: rows per second of two plain processes at once / one process alone."""
    ratios = []
    for _ in range(rounds):
        rates = []
        for processes in (1, 2):
            start = time.time() + 15  # both loaded and compiled by then
            procs = [subprocess.Popen([sys.executable, "-c", CEILING, str(model), str(data),
                                       str(background), str(CEILING_ROWS), str(start)],
                                      stdout=subprocess.PIPE, text=True)
                     for _ in range(processes)]
            rates.append(sum(float(p.communicate()[0]) for p in procs))
        ratios.append(rates[1] / rates[0])
        print(f"  machine: one process {rates[0]:,.0f} rows/s, two at once {rates[1]:,.0f} "
              f"rows/s, ratio {ratios[-1]:.2f}; load {load()}")
    return ratios


def load() -> str:
    return " ".join(f"{x:.2f}" for x in os.getloadavg())


def run_batch(model: Path, data: Path, out: Path, workers: int, args) -> dict:
    cmd = [sys.executable, "-c", CHILD, "batch", str(model), str(data), "-o", str(out),
           "--trust", "--json", "--workers", str(workers), "--background", str(args.background),
           "--chunk-rows", str(args.chunk_rows), "--id-column", "application_id"]
    load_before = load()
    t = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t
    if proc.returncode != 0:
        raise SystemExit(proc.stderr)
    summary = json.loads(proc.stdout)
    own = json.loads(proc.stderr.strip().splitlines()[-1])
    peak = own["peak_mib"]
    return {"rows": summary["rows_written"], "seconds": summary["seconds"], "wall": wall,
            "explaining": summary["seconds_explaining"], "processes": summary["processes_used"],
            "cpu": summary["cpu_seconds"], "main_cpu": own["cpu"],
            "main_cpu_explaining": summary.get("main_cpu_seconds", float("nan")),
            "occupancy": summary.get("worker_seconds", float("nan"))
            / (summary["processes_used"] * summary["seconds_explaining"]),
            "rate": summary["rows_written"] / summary["seconds_explaining"], "peak_mib": peak,
            "load": f"{load_before} -> {load()}"}


BASELINE = """
import resource
import workbench.cli, workbench.commands.batch, workbench.engine.batch  # noqa: F401
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""

WHOLE_FILE = """
import resource, sys
from workbench.engine.loading import load_data
load_data(sys.argv[1])
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""


def run_in_process(model: Path, data: Path, out: Path, chunk_rows: int) -> dict:
    cmd = [sys.executable, "-c", CHILD, "batch", str(model), str(data), "-o", str(out),
           "--trust", "--json", "--chunk-rows", str(chunk_rows), "--background", "100"]
    proc = subprocess.run(cmd, capture_output=True, text=True)
    if proc.returncode != 0:
        raise SystemExit(proc.stderr)
    summary = json.loads(proc.stdout)
    return {"rows": summary["rows_written"], "seconds": summary["seconds"],
            "peak_mib": json.loads(proc.stderr.strip().splitlines()[-1])["peak_mib"]}


def memory_check(rows: int, chunk_rows: int, tmp: Path) -> None:
    """Peak memory in this process mode (the champion, linear: fast enough for many rows)."""
    from demo_models.write import ensure_demo

    model = ensure_demo()["lending_champion"]
    small, large = tmp / "mem_n.parquet", tmp / "mem_2n.parquet"
    subprocess.check_call([sys.executable, "-c", MAKER, str(2 * rows), str(small), str(rows),
                           str(large), str(2 * rows)], stdout=subprocess.DEVNULL)
    whole = float(subprocess.check_output([sys.executable, "-c", WHOLE_FILE, str(large)]))
    base = float(subprocess.check_output([sys.executable, "-c", BASELINE]))
    print(f"memory, in one process, champion, chunks of {chunk_rows:,} rows; interpreter and "
          f"libraries alone: {base:,.0f} MiB; reading the {2 * rows:,}-row file whole peaks at "
          f"{whole:,.0f} MiB")
    results = []
    for path in (small, large):
        r = run_in_process(model, path, tmp / "mem_out.parquet", chunk_rows)
        results.append(r)
        print(f"  {r['rows']:>9,} rows  {r['seconds']:7.1f} s  peak {r['peak_mib']:6.0f} MiB")
    print(f"  peak, 2N / N: {results[1]['peak_mib'] / results[0]['peak_mib']:.2f}")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--background", type=int, default=100)
    parser.add_argument("--chunk-rows", type=int, default=20_000)
    parser.add_argument("--memory-rows", type=int, default=1_000_000,
                        help="rows of the in-process memory check (0: skip it)")
    parser.add_argument("--skip-workers", action="store_true", help="only the memory check")
    parser.add_argument("--repeat", type=int, default=1,
                        help="rounds of (1 worker N, 2 workers N, 2 workers 2N), interleaved")
    parser.add_argument("--machine-rounds", type=int, default=3,
                        help="rounds of the machine's own scaling (two plain processes / one)")
    parser.add_argument("--only-machine", action="store_true",
                        help="measure the machine's own scaling and stop")
    parser.add_argument("--double-from-half", action="store_true",
                        help="the doubling check on N/2 and N rows instead of N and 2N (half "
                             "the time; one and two workers are still timed on N rows)")
    args = parser.parse_args()
    sys.stdout.reconfigure(line_buffering=True)  # a redirected log shows each run as it ends
    print(f"load average (1, 5, 15 min) at the start: {load()}; {os.cpu_count()} processors")
    from demo_models.write import ensure_demo

    model = ensure_demo()["lending_challenger"]
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        if args.memory_rows:
            memory_check(args.memory_rows, args.chunk_rows, tmp)
        if args.skip_workers:
            return
        other_rows = args.rows // 2 if args.double_from_half else 2 * args.rows
        small, other = tmp / "book_n.parquet", tmp / f"book_{other_rows}.parquet"
        cols = subprocess.check_output(
            [sys.executable, "-c", MAKER, str(max(args.rows, other_rows)), str(small),
             str(args.rows), str(other), str(other_rows)]).decode().strip()
        print(f"{args.rows:,} and {other_rows:,} rows x {cols} columns; background "
              f"{args.background}; chunks of {args.chunk_rows:,} rows")
        reference = float(subprocess.check_output(
            [sys.executable, "-c", REFERENCE, str(model), str(small), str(args.background)]))
        print(f"reference: explain() in one process, one thread: {reference:,.0f} rows/s")
        if args.machine_rounds:
            ratios = machine_scaling(model, small, args.background, args.machine_rounds)
            print(f"  the machine's own scaling, two processes / one: {spread(ratios, '.2f')} "
                  "(the most two workers can reach here)")
        if args.only_machine:
            return
        rounds = []
        other_name = "2 workers, N/2" if args.double_from_half else "2 workers, 2N"
        for r in range(args.repeat):
            print(f"round {r + 1} of {args.repeat}")
            runs = []
            for name, path, out, workers in (("1 worker,  N", small, "o1", 1),
                                             ("2 workers, N", small, "o2", 2),
                                             (other_name, other, "o3", 2)):
                runs.append(run_batch(model, path, tmp / f"{out}.parquet", workers, args))
                report_run(name, runs[-1], reference)  # as it ends: a long run may be stopped
            one, two, third = runs
            # (one worker, two workers on N rows, two workers on the smaller, on the larger)
            rounds.append((one, two, *((third, two) if args.double_from_half else (two, third))))
        summarise(rounds)


def report_run(name: str, r: dict, reference: float) -> None:
    print(f"  {name:14s} {r['rows']:>9,} rows  explaining {r['explaining']:7.1f} s "
          f"(run {r['seconds']:6.1f} s, wall {r['wall']:6.1f} s, {r['processes']} "
          f"process(es))  {r['rate']:8,.0f} rows/s ({r['rate'] / reference:4.2f}x "
          f"reference)  main process peak {r['peak_mib']:5.0f} MiB")
    print(f"  {'':14s} workers' processor time {r['cpu']:7.1f} s = "
          f"{r['cpu'] / r['explaining']:.2f} cores busy on average; "
          f"{r['rows'] / r['cpu']:,.0f} rows per processor-second; main process "
          f"{r['main_cpu']:.1f} s in all, {r['main_cpu_explaining']:.1f} s while explaining "
          f"({r['main_cpu_explaining'] / r['explaining']:.2f} of a core); load average "
          f"(1, 5, 15 min) {r['load']}")
    print(f"  {'':14s} each worker had rows to explain {r['occupancy']:.0%} of the explaining "
          "time (idle workers, whatever the load)")


def spread(values, fmt: str) -> str:
    values = list(values)
    return (f"min {format(min(values), fmt)} / median {format(statistics.median(values), fmt)} "
            f"/ max {format(max(values), fmt)}")


def summarise(rounds) -> None:
    """Every figure the issue asks for, over the rounds: each round is (one worker on N rows,
    two workers on N rows, two workers on the smaller and on the larger file of the doubling)."""
    print(f"over {len(rounds)} round(s):")
    print(f"  rows per second, one worker:  {spread((o['rate'] for o, *_ in rounds), ',.0f')}")
    print(f"  rows per second, two workers: {spread((t['rate'] for _, t, *_ in rounds), ',.0f')}")
    print(f"  two workers / one worker throughput (same round): "
          f"{spread((t['rate'] / o['rate'] for o, t, *_ in rounds), '.2f')} (target >= 1.7)")
    lo, hi = rounds[0][2]["rows"], rounds[0][3]["rows"]
    print(f"  time for {lo:,} rows, two workers (explaining, s): "
          f"{spread((a['explaining'] for *_, a, _ in rounds), '.1f')}")
    print(f"  time for {hi:,} rows, two workers (explaining, s): "
          f"{spread((b['explaining'] for *_, b in rounds), '.1f')}")
    print(f"  time for twice the rows / time for the rows (same round): "
          f"{spread((b['explaining'] / a['explaining'] for *_, a, b in rounds), '.2f')} "
          "(target <= 2.2)")
    print(f"  rows per processor-second, two workers / one (same round): "
          f"{spread(((t['rows'] / t['cpu']) / (o['rows'] / o['cpu']) for o, t, *_ in rounds), '.2f')}"
          " (1.0 = each core as fast with two workers as with one)")
    print(f"  main process peak memory, MiB, {lo:,} rows: "
          f"{spread((a['peak_mib'] for *_, a, _ in rounds), '.0f')}; {hi:,} rows: "
          f"{spread((b['peak_mib'] for *_, b in rounds), '.0f')}; "
          f"ratio: {spread((b['peak_mib'] / a['peak_mib'] for *_, a, b in rounds), '.2f')}")
    print(f"  workers' occupancy, two workers, N rows: "
          f"{spread((t['occupancy'] for _, t, *_ in rounds), '.0%')}")
    print(f"  main process processor time, s, two workers, N rows: "
          f"{spread((t['main_cpu'] for _, t, *_ in rounds), '.1f')} in all; while explaining, "
          f"as a share of one core: "
          f"{spread((t['main_cpu_explaining'] / t['explaining'] for _, t, *_ in rounds), '.3f')}")

if __name__ == "__main__":
    main()
