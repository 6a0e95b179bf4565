# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Keep DDS traffic on this machine, in a domain of its own (no rclpy import here).

Every test run, the demo and the benchmark talk DDS between processes of their own. Two
rules keep that traffic private:

* ``ROS_AUTOMATIC_DISCOVERY_RANGE=LOCALHOST``: discovery stays on the loopback interface.
* A ``ROS_DOMAIN_ID`` that no other run on this machine uses at the same time. The id is
  claimed by taking an exclusive ``fcntl`` lock on ``/tmp/corridor_pid-domain-<id>.lock``;
  the lock is held until the claiming process exits (the kernel drops it then, even after a
  crash), so concurrent runs of several workers never share a domain.

Child processes get the claimed id through their environment (``local_dds_env``); they do
not claim again. The controller node itself never calls this module: on a vehicle it uses
whatever domain the integrator configured.
"""

from __future__ import annotations

from collections.abc import Mapping
import fcntl
import os

LOCK_DIR = '/tmp'
"""Folder of the lock files; one fixed place so every process on the machine agrees."""

LOWEST_DOMAIN_ID = 1
"""Smallest domain id handed out (0, the ROS default, is left to interactive use)."""

HIGHEST_DOMAIN_ID = 100
"""Largest domain id handed out (ids up to 101 are valid on Linux with default ports)."""

REMOVED_VARIABLES = (
    'ROS_LOCALHOST_ONLY',
    'ROS_STATIC_PEERS',
    'ROS_DISCOVERY_SERVER',
    'FASTRTPS_DEFAULT_PROFILES_FILE',
    'FASTDDS_DEFAULT_PROFILES_FILE',
)
"""Variables dropped from an isolated environment.

``ROS_LOCALHOST_ONLY`` is the older distributions' switch (Jazzy prints a deprecation
warning for it); the others could point discovery at another host.
"""

_held: dict[int, int] = {}
"""Domain id -> file descriptor of its held lock, for this process."""


class DomainIdUnavailableError(RuntimeError):
    """Every domain id in the range is held by another process on this machine."""


def lock_path(domain_id: int) -> str:
    """Return the lock file path that guards ``domain_id``."""
    return os.path.join(LOCK_DIR, f'corridor_pid-domain-{domain_id}.lock')


def _try_lock(domain_id: int) -> int | None:
    """Take the lock of ``domain_id`` without waiting; return its descriptor or None."""
    fd = os.open(lock_path(domain_id), os.O_RDWR | os.O_CREAT, 0o666)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        os.close(fd)
        return None
    os.ftruncate(fd, 0)
    os.write(fd, f'{os.getpid()}\n'.encode())
    return fd


def claim_domain_id(*, fresh: bool = False) -> int:
    """Return a ROS domain id (1..100) that no other process on this machine holds.

    The first call takes the lock of a free id and keeps it for the life of this process;
    later calls return the same id. With ``fresh=True`` another, additional id is claimed
    (for a test that needs a second, separate domain).

    Raises:
        DomainIdUnavailableError: all ids in the range are held.
    """
    if _held and not fresh:
        return next(iter(_held))
    span = HIGHEST_DOMAIN_ID - LOWEST_DOMAIN_ID + 1
    # Start at a pid-dependent id so concurrent claimers rarely try the same file first.
    start = os.getpid() % span
    for step in range(span):
        domain_id = LOWEST_DOMAIN_ID + (start + step) % span
        if domain_id in _held:
            continue
        fd = _try_lock(domain_id)
        if fd is not None:
            _held[domain_id] = fd
            return domain_id
    raise DomainIdUnavailableError(
        f'every ROS domain id from {LOWEST_DOMAIN_ID} to {HIGHEST_DOMAIN_ID} is in use by '
        f'other processes (lock files {lock_path(LOWEST_DOMAIN_ID)!r} ...)')


def release_domain_id(domain_id: int) -> None:
    """Give back a domain id claimed by this process (no-op if it holds none such)."""
    fd = _held.pop(domain_id, None)
    if fd is not None:
        os.close(fd)


def local_dds_env(
        base: Mapping[str, str] | None = None, domain_id: int | None = None) -> dict[str, str]:
    """Return a copy of ``base`` (default: ``os.environ``) isolated for local DDS.

    Sets ``ROS_AUTOMATIC_DISCOVERY_RANGE=LOCALHOST`` and ``ROS_DOMAIN_ID`` to
    ``domain_id`` (default: this process's claimed id, see ``claim_domain_id``), and drops
    the variables of ``REMOVED_VARIABLES``. Pass the result as ``env=`` to subprocesses.
    """
    env = dict(os.environ if base is None else base)
    for name in REMOVED_VARIABLES:
        env.pop(name, None)
    env['ROS_AUTOMATIC_DISCOVERY_RANGE'] = 'LOCALHOST'
    env['ROS_DOMAIN_ID'] = str(claim_domain_id() if domain_id is None else domain_id)
    return env


def isolate_this_process() -> int:
    """Apply ``local_dds_env`` to ``os.environ`` itself; return the domain id in force.

    Call it before ``rclpy.init`` in a process that talks DDS (the demo, the benchmark).
    """
    env = local_dds_env()
    for name in REMOVED_VARIABLES:
        os.environ.pop(name, None)
    os.environ['ROS_AUTOMATIC_DISCOVERY_RANGE'] = env['ROS_AUTOMATIC_DISCOVERY_RANGE']
    os.environ['ROS_DOMAIN_ID'] = env['ROS_DOMAIN_ID']
    return int(env['ROS_DOMAIN_ID'])
