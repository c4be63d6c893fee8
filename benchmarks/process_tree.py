"""Sample the memory and CPU time of a process and all its descendants, from ``/proc`` (Linux).

A run on a local dask cluster is a tree of processes: the ``gisrun run`` process and the worker
processes the cluster starts. No one process's high-water mark covers it, so
:class:`TreeSampler` reads every process of the tree every ``interval`` seconds and keeps

- ``peak_rss_mb``: the largest sum of the tree's resident sizes seen at one sample (a lower
  bound of the true peak: a spike between two samples is missed);
- ``sum_hwm_mb``: the sum over the processes of each one's own high-water mark (VmHWM, last seen
  while it was alive; an upper bound: the processes need not peak at the same moment);
- ``cpu_s``: the sum over the processes of their user + system CPU time, last seen (misses at
  most one interval of each process's last work).

Used by ``bench_run.py``. Nothing beyond the standard library.
"""

from __future__ import annotations

import os
import threading
from dataclasses import dataclass, field
from pathlib import Path

__all__ = ["TreeSampler", "TreeFigures"]

_TICKS = os.sysconf("SC_CLK_TCK")


@dataclass
class TreeFigures:
    """What the sampler saw of one process tree."""

    peak_rss_mb: float = 0.0
    sum_hwm_mb: float = 0.0
    cpu_s: float = 0.0
    samples: int = 0
    #: pid -> (short command, VmHWM MB, CPU s), last seen.
    processes: dict[int, tuple[str, float, float]] = field(default_factory=dict)


def _parents() -> dict[int, int]:
    """pid -> parent pid of every process now running."""
    out = {}
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
        except OSError:  # gone meanwhile
            continue
        out[int(entry.name)] = int(stat[stat.rindex(")") + 2:].split()[1])
    return out


def _tree(root: int) -> list[int]:
    """``root`` and its descendants now running."""
    children: dict[int, list[int]] = {}
    for pid, parent in _parents().items():
        children.setdefault(parent, []).append(pid)
    found, todo = [], [root]
    while todo:
        pid = todo.pop()
        found.append(pid)
        todo.extend(children.get(pid, []))
    return found


def _read(pid: int) -> tuple[str, float, float, float] | None:
    """(command, VmRSS MB, VmHWM MB, CPU s) of one process, None when it is gone."""
    try:
        status = Path(f"/proc/{pid}/status").read_text()
        stat = Path(f"/proc/{pid}/stat").read_text()
        cmd = Path(f"/proc/{pid}/cmdline").read_bytes().replace(b"\0", b" ").decode()[:80]
    except OSError:
        return None
    kb = {line.split(":")[0]: int(line.split()[1]) for line in status.splitlines()
          if line.startswith(("VmRSS", "VmHWM"))}
    fields = stat[stat.rindex(")") + 2:].split()
    cpu = (int(fields[11]) + int(fields[12])) / _TICKS  # utime, stime (fields 14, 15 of stat)
    return cmd, kb.get("VmRSS", 0) / 1024, kb.get("VmHWM", 0) / 1024, cpu


class TreeSampler:
    """Sample the tree under ``pid`` in a background thread until :meth:`stop`."""

    def __init__(self, pid: int, interval: float = 0.5) -> None:
        self.pid, self.interval = pid, interval
        self.figures = TreeFigures()
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._loop, daemon=True)

    def start(self) -> TreeSampler:
        self._thread.start()
        return self

    def stop(self) -> TreeFigures:
        self._stop.set()
        self._thread.join()
        seen = self.figures.processes.values()
        self.figures.sum_hwm_mb = sum(hwm for _, hwm, _ in seen)
        self.figures.cpu_s = sum(cpu for _, _, cpu in seen)
        return self.figures

    def _loop(self) -> None:
        while not self._stop.is_set():
            self.sample()
            self._stop.wait(self.interval)

    def sample(self) -> None:
        """Read every process of the tree once."""
        total = 0.0
        for pid in _tree(self.pid):
            got = _read(pid)
            if got is None:
                continue
            cmd, rss, hwm, cpu = got
            total += rss
            _, hwm_seen, cpu_seen = self.figures.processes.get(pid, ("", 0.0, 0.0))
            # an exiting process no longer shows its memory: keep the largest figures seen
            self.figures.processes[pid] = (cmd, max(hwm, hwm_seen), max(cpu, cpu_seen))
        self.figures.peak_rss_mb = max(self.figures.peak_rss_mb, total)
        self.figures.samples += 1
