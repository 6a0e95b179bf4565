# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Test-wide settings: markers, and DDS kept on this machine in a domain of its own.

For the whole pytest run, ``ROS_AUTOMATIC_DISCOVERY_RANGE=LOCALHOST`` and a ``ROS_DOMAIN_ID``
claimed with a lock (``corridor_pid.ros.isolation``) are set in ``os.environ``, so rclpy in
this process and every subprocess a test starts stay private, even when several test runs
share the machine. Pass ``env=dds_env`` (or ``os.environ``) to subprocesses; a test that
needs a second, separate domain takes ``other_domain_env``.
"""

from __future__ import annotations

from collections.abc import Iterator
import os
from pathlib import Path
import sys

from corridor_pid.ros import isolation
from hypothesis import settings
import pytest

# Shared test helpers at the top of test/ (e.g. reference_gains) import by name.
sys.path.insert(0, str(Path(__file__).parent))

# Property tests: a quick default for development; the CI profile (CI=true, as CI runs
# .ci/run) generates at least 10,000 sequences per property.
settings.register_profile('dev', max_examples=300, deadline=None)
settings.register_profile('ci', max_examples=10_000, deadline=None)
settings.load_profile(os.environ.get('HYPOTHESIS_PROFILE') or (
    'ci' if os.environ.get('CI') == 'true' else 'dev'))


def pytest_configure(config: pytest.Config) -> None:
    """Register the project's markers."""
    config.addinivalue_line(
        'markers', 'dds: talks DDS between real processes (local domain of its own)')
    config.addinivalue_line(
        'markers', 'slow: takes more than a few seconds; CI runs it on Python 3.11 only')


@pytest.fixture(scope='session', autouse=True)
def ros_domain_id() -> Iterator[int]:
    """Claim a private ROS domain id and keep DDS on loopback for the whole run."""
    with pytest.MonkeyPatch.context() as patch:
        env = isolation.local_dds_env()
        for name in isolation.REMOVED_VARIABLES:
            patch.delenv(name, raising=False)
        patch.setenv('ROS_AUTOMATIC_DISCOVERY_RANGE', env['ROS_AUTOMATIC_DISCOVERY_RANGE'])
        patch.setenv('ROS_DOMAIN_ID', env['ROS_DOMAIN_ID'])
        yield int(env['ROS_DOMAIN_ID'])


@pytest.fixture
def dds_env(ros_domain_id: int) -> dict[str, str]:
    """Return the environment for a subprocess in this run's private domain."""
    return isolation.local_dds_env(os.environ, ros_domain_id)


@pytest.fixture
def other_domain_env() -> Iterator[dict[str, str]]:
    """Return a subprocess environment in a second private domain (released afterwards)."""
    domain_id = isolation.claim_domain_id(fresh=True)
    try:
        yield isolation.local_dds_env(os.environ, domain_id)
    finally:
        isolation.release_domain_id(domain_id)
