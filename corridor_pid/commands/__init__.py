# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""commands."""
