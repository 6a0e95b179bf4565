# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""The demo: controller node and simulated vehicle over local DDS, script, report.

ROS-free parts live here (the vehicle's world and timeline, the script, child processes,
the run table, events, report and summary); what needs rclpy is in
``corridor_pid.ros.sim_node`` and ``corridor_pid.ros.demo_driver``. Import the modules
directly (``corridor_pid.demo.run.run_demo``): this package re-exports nothing, so the
simulated vehicle node loads only what it uses.
"""

from __future__ import annotations

__all__: list[str] = []
