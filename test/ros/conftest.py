# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Make the ROS test helpers importable."""

from __future__ import annotations

from pathlib import Path
import sys

sys.path.insert(0, str(Path(__file__).parent))
