# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Measurements behind `corridor-pid bench` and the scripts in scripts/ (no ROS here)."""
