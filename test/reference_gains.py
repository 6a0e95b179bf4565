# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""A fixed reference configuration for tests whose expected figures were computed for it.

The shipped defaults may be retuned; tests of the tuning and margin code pin the loop they
were written against here, so a change of defaults does not silently move their numbers.
"""

from __future__ import annotations

from corridor_pid.core.config import Config, default_config

REFERENCE_GAINS = {
    'gains.kp': 0.6, 'gains.ki': 0.0, 'gains.kd': 0.25, 'lookahead': 1.0,
    'derivative.filter_time': 0.05, 'smoothing.enabled': False,
}


def reference_config() -> Config:
    """Return the defaults with the reference gains (kp 0.6, kd 0.25, L 1.0 m, Tf 0.05 s)."""
    return default_config().replaced(REFERENCE_GAINS)
