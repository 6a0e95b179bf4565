# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""``python -m corridor_pid``: the same as the ``corridor-pid`` command."""

from __future__ import annotations

import sys

from corridor_pid.cli import main

if __name__ == '__main__':
    sys.exit(main())
