# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Does this computer keep the control deadline? The verdict of ``corridor-pid bench``.

At a control rate ``f`` the deadline is one period, ``1/f``: a command must leave the node
before the next pose arrives. The bench measures the pose -> ``steering_angle`` latency
of the node over local DDS; the verdict reads its 99th percentile against the deadline:

* ``pass`` — no pose lost, p99 within :data:`MARGIN` of the deadline (half a period), and
  the node needs at most :data:`CPU_SHARE_LIMIT` of one core at that rate when known;
* ``marginal`` — no pose lost and p99 within the deadline, but without that margin (or the
  node needs more than that share of a core: no room for the rest of the vehicle computer);
* ``fail`` — a pose lost, or p99 beyond the deadline.

Half a period of margin is a common choice for soft real-time loops (common practice, no
source): the other half absorbs the tail beyond p99 and the other work on the computer.
"""

from __future__ import annotations

from typing import NamedTuple

__all__ = ['CPU_SHARE_LIMIT', 'Goal', 'MARGIN', 'Verdict', 'deadline_verdict']

MARGIN = 0.5
"""p99 latency must stay within this fraction of the period for a 'pass'."""

CPU_SHARE_LIMIT = 0.5
"""Share of one core the node may need at the control rate for a 'pass'."""


class Verdict(NamedTuple):
    """The verdict: level ('pass', 'marginal', 'fail') and one sentence saying why."""

    level: str
    text: str

    @property
    def ok(self) -> bool:
        """Return whether the deadline is kept with margin."""
        return self.level == 'pass'


class Goal(NamedTuple):
    """One goal of the project and the figure measured for it."""

    name: str
    value: float
    limit: float
    unit: str
    at_most: bool = True
    """The value must be <= limit (False: >= limit)."""

    @property
    def ok(self) -> bool:
        """Return whether the measured value meets the goal."""
        return self.value <= self.limit if self.at_most else self.value >= self.limit


def deadline_verdict(rate: float, p99: float, drops: int, sent: int,
                     cpu: float | None = None) -> Verdict:
    """Return the verdict for control at ``rate`` [Hz].

    Args:
        rate: control (pose) rate [Hz]; the deadline is 1/rate.
        p99: the node's 99th-percentile pose -> command latency [s].
        drops: poses that produced no command.
        sent: poses sent.
        cpu: the node's CPU use at this rate as a share of one core, if measured.

    """
    deadline = 1.0 / rate
    share = p99 / deadline
    said = (f'p99 {p99 * 1e3:.2f} ms is {share:.0%} of the {deadline * 1e3:.3g} ms '
            f'deadline')
    if drops > 0:
        return Verdict('fail', f'{drops} of {sent} poses gave no command; {said}')
    if p99 > deadline:
        return Verdict('fail', f'{said}: commands come too late')
    if p99 > MARGIN * deadline:
        return Verdict('marginal', f'{said} (more than {MARGIN:.0%}): little margin')
    if cpu is not None and cpu > CPU_SHARE_LIMIT:
        return Verdict('marginal', f'{said}, but the node needs {cpu:.0%} of a core')
    tail = '' if cpu is None else f', {cpu:.0%} of a core'
    return Verdict('pass', f'{said}, no pose lost{tail}')
