# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""CPU time and resident memory of a process, read from ``/proc`` (Linux).

``/proc/<pid>/stat`` fields 14 and 15 are the user and system CPU time in clock ticks
(proc(5)); ``/proc/<pid>/status`` line ``VmRSS`` is the resident set size in kB. Two
samples give the CPU share over the interval between them (1.0 = one core busy).
"""

from __future__ import annotations

import os
import time
from typing import NamedTuple

__all__ = ['MIB', 'ProcSample', 'cpu_share', 'process_sample', 'rss_bytes']

MIB = 1024 * 1024
"""Bytes in a mebibyte."""

_TICKS = os.sysconf('SC_CLK_TCK')


class ProcSample(NamedTuple):
    """One reading of a process: wall clock [s], CPU time used so far [s], resident [bytes]."""

    wall: float
    cpu: float
    rss: int


def _cpu_seconds(pid: int) -> float:
    """Return the user + system CPU time of ``pid`` so far [s]."""
    with open(f'/proc/{pid}/stat', encoding='ascii') as handle:
        text = handle.read()
    # The command name (field 2) is in parentheses and may hold spaces: split after it.
    fields = text[text.rindex(')') + 2:].split()
    utime, stime = int(fields[11]), int(fields[12])  # fields 14 and 15 of proc(5)
    return (utime + stime) / _TICKS


def rss_bytes(pid: int) -> int:
    """Return the resident set size of ``pid`` [bytes] (``VmRSS``)."""
    with open(f'/proc/{pid}/status', encoding='ascii') as handle:
        for line in handle:
            if line.startswith('VmRSS:'):
                return int(line.split()[1]) * 1024
    raise OSError(f'no VmRSS line in /proc/{pid}/status (is it a kernel thread?)')


def process_sample(pid: int) -> ProcSample:
    """Return the wall clock, CPU time and resident memory of ``pid`` now.

    Raises:
        OSError: the process does not exist (any more).

    """
    return ProcSample(time.monotonic(), _cpu_seconds(pid), rss_bytes(pid))


def cpu_share(before: ProcSample, after: ProcSample) -> float:
    """Return the CPU used between two samples as a share of one core (0.5 = half a core)."""
    wall = after.wall - before.wall
    if wall <= 0.0:
        return 0.0
    return (after.cpu - before.cpu) / wall
