# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""corridor_pid: keep a wheeled vehicle on the centre of a corridor or lane.

A pure-Python steering/speed controller core (``corridor_pid.core``), a thin ROS 2 node
(``corridor_pid.ros``), and offline tools: simulator (``corridor_pid.sim``), bag replay,
tuning and stability margins (``corridor_pid.tuning``), and a benchmark.
"""

__version__ = '0.1.0'
