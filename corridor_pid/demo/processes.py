# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Child processes of the demo: each in a session of its own, stopped by PID and group.

A child is started with ``start_new_session=True`` (so a Ctrl-C in the terminal reaches only
the demo, which then stops its children in order) and its output goes to a log file. Stop
order: SIGINT (the nodes publish their final command and exit), then SIGTERM, then SIGKILL
to the whole process group, each after a grace period. :class:`ProcessGroup` stops every
child it started, last started first, and is a context manager, so success, failure and
Ctrl-C all end in the same clean-up. On Linux a child also gets SIGTERM from the kernel
when the demo itself dies without cleaning up (``PR_SET_PDEATHSIG``), so even a SIGKILL of
the demo leaves no orphan behind.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
import contextlib
import os
from pathlib import Path
import signal
import subprocess
import sys

from corridor_pid.core.errors import DemoError

__all__ = ['ChildProcess', 'ProcessGroup']

STOP_SIGNALS = (signal.SIGINT, signal.SIGTERM, signal.SIGKILL)
"""Signals sent, in this order, until a child has exited."""


PR_SET_PDEATHSIG = 1
"""prctl(2) option: the signal the kernel sends this process when its parent dies."""


def _die_with_parent() -> None:
    """In the child before exec: ask for SIGTERM when the parent dies (Linux only)."""
    import ctypes

    libc = ctypes.CDLL(None, use_errno=True)
    libc.prctl(PR_SET_PDEATHSIG, int(signal.SIGTERM), 0, 0, 0)


class ChildProcess:
    """One child process in its own session, its output in a log file."""

    def __init__(self, name: str, args: Sequence[str], log_path: Path,
                 env: Mapping[str, str] | None = None, cwd: str | None = None) -> None:
        """Start ``args`` as ``name``; stdout and stderr go to ``log_path``."""
        self.name = name
        self.args = list(args)
        self.log_path = log_path
        log_path.parent.mkdir(parents=True, exist_ok=True)
        with open(log_path, 'wb') as log:
            self.popen = subprocess.Popen(
                self.args, env=dict(env) if env is not None else None, cwd=cwd,
                stdin=subprocess.DEVNULL, stdout=log, stderr=subprocess.STDOUT,
                start_new_session=True,
                preexec_fn=_die_with_parent if sys.platform == 'linux' else None)
        self.pid = self.popen.pid

    @property
    def returncode(self) -> int | None:
        """Exit code, or None while running."""
        return self.popen.poll()

    def output_tail(self, lines: int = 5) -> str:
        """Return the last ``lines`` lines of the child's log."""
        try:
            text = self.log_path.read_text(encoding='utf-8', errors='replace')
        except OSError:
            return ''
        return '\n'.join(text.rstrip().splitlines()[-lines:])

    def check_running(self) -> None:
        """Raise :class:`DemoError` (with the end of its log) if the child exited."""
        code = self.popen.poll()
        if code is not None:
            tail = self.output_tail()
            raise DemoError(
                f'{self.name} exited with code {code} (log {str(self.log_path)!r})'
                + (f': {tail.splitlines()[-1]}' if tail else ''))

    def _send(self, signum: int) -> None:
        if signum == signal.SIGKILL:
            # The last resort reaches anything the child may have started, too.
            with contextlib.suppress(ProcessLookupError, PermissionError):
                os.killpg(self.pid, signal.SIGKILL)
        with contextlib.suppress(ProcessLookupError):
            os.kill(self.pid, signum)

    def stop(self, grace: float = 5.0) -> int:
        """Stop the child (SIGINT, SIGTERM, SIGKILL, ``grace`` s apart); return its exit code."""
        for signum in STOP_SIGNALS:
            if self.popen.poll() is not None:
                break
            self._send(signum)
            with contextlib.suppress(subprocess.TimeoutExpired):
                self.popen.wait(grace)
        code = self.popen.wait()
        # A child that exited on its own may still leave a group member behind.
        with contextlib.suppress(ProcessLookupError, PermissionError):
            os.killpg(self.pid, signal.SIGKILL)
        return code


class ProcessGroup:
    """The demo's children; :meth:`stop_all` (or leaving the ``with`` block) ends them all."""

    def __init__(self, log_dir: Path, env: Mapping[str, str] | None = None,
                 cwd: str | None = None) -> None:
        """Start children with logs in ``log_dir``, environment ``env``, folder ``cwd``."""
        self.log_dir = log_dir
        self.env = env
        self.cwd = cwd
        self.children: list[ChildProcess] = []
        self.exit_codes: dict[str, int] = {}

    def start(self, name: str, args: Sequence[str]) -> ChildProcess:
        """Start a child ``name`` (log ``<log_dir>/<name>.log``) and return it."""
        child = ChildProcess(name, args, self.log_dir / f'{name}.log', self.env, self.cwd)
        self.children.append(child)
        return child

    def check_running(self) -> None:
        """Raise :class:`DemoError` if any child has exited."""
        for child in self.children:
            child.check_running()

    def stop_all(self, grace: float = 5.0) -> dict[str, int]:
        """Stop every child, last started first; return name -> exit code."""
        while self.children:
            child = self.children.pop()
            self.exit_codes[child.name] = child.stop(grace)
        return dict(self.exit_codes)

    def __enter__(self) -> ProcessGroup:
        """Return self."""
        return self

    def __exit__(self, *exc: object) -> None:
        """Stop every child."""
        self.stop_all()
