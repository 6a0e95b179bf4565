# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Process plumbing shared by the node executables: own signal handling, own rclpy context.

rclpy is initialised without its signal handlers (DESIGN §4): SIGINT and SIGTERM are only
recorded, so each executable can leave its loop and send its last messages before it shuts
down.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from contextlib import contextmanager
import signal
from types import FrameType

from corridor_pid.core.errors import CorridorPidError
import rclpy
from rclpy.context import Context
from rclpy.signals import SignalHandlerOptions
from rclpy.utilities import try_shutdown

__all__ = ['RosStartError', 'caught_signals', 'ros_context']


class RosStartError(CorridorPidError):
    """rcl refused to start (bad --ros-args, middleware not available, ...)."""


@contextmanager
def caught_signals() -> Iterator[list[int]]:
    """Record SIGINT and SIGTERM in the yielded list; restore the previous handlers after."""
    signals: list[int] = []

    def on_signal(signum: int, frame: FrameType | None) -> None:
        signals.append(signum)

    previous = {sig: signal.signal(sig, on_signal) for sig in (signal.SIGINT, signal.SIGTERM)}
    try:
        yield signals
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)


@contextmanager
def ros_context(argv: Sequence[str]) -> Iterator[Context]:
    """Yield a started rclpy context of its own (no rclpy signal handlers); shut it down after.

    Raises:
        RosStartError: rcl refused to start, with the first line of its reason.

    """
    context = Context()
    try:
        rclpy.init(args=list(argv), context=context,
                   signal_handler_options=SignalHandlerOptions.NO)
    except Exception as err:  # noqa: BLE001 - rcl errors have no public type
        raise RosStartError(f'ROS could not start: {str(err).splitlines()[0]}') from err
    try:
        yield context
    finally:
        try_shutdown(context=context)
