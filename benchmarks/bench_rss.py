"""Resident memory of one command over time, with dfkit's progress lines between the samples.

    .venv/bin/python benchmarks/bench_rss.py [--every 0.005] [--show 0.25] -- CMD ...
    e.g. .venv/bin/python benchmarks/bench_rss.py -- .venv/bin/python -m dfkit fix SHEET -o out.csv

``os.wait4`` (used by ``bench_floor.py``) gives only a process's peak; this shows *when* the memory is taken, so a
stage that leaves memory behind (objects kept alive, or freed memory the allocator keeps) can be told from the one
that reaches the peak. It reads ``VmRSS`` from ``/proc/PID/status`` every ``--every`` seconds (Linux only) and
prints one sample per ``--show`` seconds, every line the child writes to stderr that starts with ``dfkit:`` (the
CLI's progress lines), the peak sample and the kernel's own peak (``ru_maxrss``) at the end. Sampling can miss a
peak shorter than its period; the kernel's figure cannot. Nothing is asserted.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import threading
import time


def _rss_mib(pid):
    try:
        with open(f"/proc/{pid}/status") as f:
            for line in f:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) / 1024
    except OSError:
        return None
    return None


def timeline(cmd, every=0.005):
    """(samples [(s, MiB)], progress [(s, line)], kernel peak MiB, exit code) of one run of ``cmd``."""
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    progress = []

    def read_stderr():
        for line in p.stderr:
            if line.startswith("dfkit:"):
                progress.append((time.perf_counter() - t0, line.strip()))

    reader = threading.Thread(target=read_stderr)
    reader.start()
    samples = []
    while True:
        pid, status, ru = os.wait4(p.pid, os.WNOHANG)
        if pid:
            break
        rss = _rss_mib(p.pid)
        if rss is not None:
            samples.append((time.perf_counter() - t0, rss))
        time.sleep(every)
    reader.join()
    return samples, progress, ru.ru_maxrss / 1024, os.waitstatus_to_exitcode(status)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--every", type=float, default=0.005, help="sampling period, s")
    ap.add_argument("--show", type=float, default=0.25, help="print one sample per this many seconds")
    ap.add_argument("cmd", nargs=argparse.REMAINDER)
    a = ap.parse_args()
    cmd = a.cmd[1:] if a.cmd[:1] == ["--"] else a.cmd
    if not cmd:
        ap.error("give the command after --")
    samples, progress, kernel_peak, code = timeline(cmd, a.every)
    shown, next_t = [], 0.0
    for t, rss in samples:
        if t >= next_t:
            shown.append((t, f"RSS {rss:.0f} MiB"))
            next_t = t + a.show
    for t, line in sorted(shown + progress):
        print(f"{t:7.2f} s  {line}")
    if samples:
        t, rss = max(samples, key=lambda s: s[1])
        print(f"peak sample {rss:.0f} MiB at {t:.2f} s; kernel peak {kernel_peak:.0f} MiB; exit {code}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
