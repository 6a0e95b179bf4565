# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Child processes: stop escalation, process group, exit detection, death of the parent."""

from __future__ import annotations

import os
from pathlib import Path
import signal
import subprocess
import sys
import textwrap
import time

from corridor_pid.core.errors import DemoError
from corridor_pid.demo.processes import ChildProcess, ProcessGroup
import pytest

WAIT = 60.0


def python(code: str) -> list[str]:
    """Return a command running ``code`` with this interpreter."""
    return [sys.executable, '-c', textwrap.dedent(code)]


def wait_for_line(path: Path, text: str) -> str:
    """Wait until the file ``path`` holds ``text``; return its content."""
    deadline = time.monotonic() + WAIT
    while True:
        content = path.read_text() if path.is_file() else ''
        if text in content:
            return content
        assert time.monotonic() < deadline, f'{text!r} never appeared in {path}'
        time.sleep(0.02)


def alive(pid: int) -> bool:
    """Return whether a process ``pid`` exists (and is not a zombie)."""
    try:
        state = Path(f'/proc/{pid}/stat').read_text().rsplit(')', 1)[1].split()[0]
    except OSError:
        return False
    return state != 'Z'


def test_sigint_is_enough_for_a_well_behaved_child(tmp_path: Path) -> None:
    """A child that exits on SIGINT is not sent anything further."""
    child = ChildProcess('polite', python("""
        import signal, sys, time
        signal.signal(signal.SIGINT, lambda *a: sys.exit(0))
        print('ready', flush=True)
        while True: time.sleep(0.01)
    """), tmp_path / 'polite.log')
    wait_for_line(child.log_path, 'ready')
    assert child.stop(grace=WAIT) == 0


def test_stubborn_child_gets_sigterm_then_sigkill_with_its_group(tmp_path: Path) -> None:
    """Ignoring SIGINT and SIGTERM ends in SIGKILL, for the child and its grandchild."""
    child = ChildProcess('stubborn', python(f"""
        import signal, subprocess, sys, time
        for sig in (signal.SIGINT, signal.SIGTERM):
            signal.signal(sig, signal.SIG_IGN)
        grandchild = subprocess.Popen([{sys.executable!r}, '-c',
            'import signal, time\\nsignal.signal(signal.SIGTERM, signal.SIG_IGN)\\n'
            'time.sleep(600)'])
        print('grandchild', grandchild.pid, flush=True)
        while True: time.sleep(0.01)
    """), tmp_path / 'stubborn.log')
    content = wait_for_line(child.log_path, 'grandchild')
    grandchild = int(content.split()[1])
    assert child.stop(grace=0.5) == -signal.SIGKILL
    deadline = time.monotonic() + WAIT
    while alive(grandchild):
        assert time.monotonic() < deadline, 'the grandchild survived'
        time.sleep(0.02)


def test_early_exit_is_a_demo_error_naming_the_log(tmp_path: Path) -> None:
    """check_running raises DemoError with the exit code, log path and last line."""
    group = ProcessGroup(tmp_path)
    child = group.start('broken', python('print("ERROR: no such scenario"); raise SystemExit(1)'))
    child.popen.wait(WAIT)
    with pytest.raises(DemoError, match=r'broken exited with code 1 .*broken\.log.*no such'):
        group.check_running()
    assert group.stop_all() == {'broken': 1}


def test_children_die_with_a_killed_parent(tmp_path: Path) -> None:
    """A parent killed outright (no clean-up) still takes its children with it."""
    pid_file = tmp_path / 'child.pid'
    parent = subprocess.Popen(python(f"""
        from pathlib import Path
        import time
        from corridor_pid.demo.processes import ProcessGroup
        group = ProcessGroup(Path({str(tmp_path)!r}))
        child = group.start('sleeper', [{sys.executable!r}, '-c', 'import time; time.sleep(600)'])
        Path({str(pid_file)!r}).write_text(str(child.pid))
        time.sleep(600)
    """), start_new_session=True)
    try:
        deadline = time.monotonic() + WAIT
        while not (pid_file.is_file() and pid_file.read_text()):
            assert parent.poll() is None and time.monotonic() < deadline
            time.sleep(0.02)
        child = int(pid_file.read_text())
        assert alive(child)
        os.kill(parent.pid, signal.SIGKILL)
        parent.wait(WAIT)
        deadline = time.monotonic() + WAIT
        while alive(child):
            assert time.monotonic() < deadline, 'the child outlived its killed parent'
            time.sleep(0.02)
    finally:
        if parent.poll() is None:
            parent.kill()
            parent.wait()
