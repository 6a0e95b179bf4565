# SPDX-License-Identifier: Apache-2.0
# Copyright 2026 corridor_pid contributors
"""Progress of a demo run on stderr: one refreshed line, and event lines above it.

On a terminal the line shows simulated time against the total, the true lateral offset and
the controller's state (tqdm, an optional extra; a plain refreshed line without it). When
stderr is not a terminal (CI, a pipe) only the event lines are printed.
"""

from __future__ import annotations

import shutil
import sys
import time
from typing import Any, TextIO

__all__ = ['Progress']

REFRESH = 0.1
"""Seconds between refreshes of the progress line."""


class Progress:
    """The demo's progress line and event log on a stream (default stderr)."""

    def __init__(self, total: float, stream: TextIO | None = None,
                 live: bool | None = None) -> None:
        """Show progress over ``total`` seconds of simulated time.

        Args:
            total: length of the run [s].
            stream: where to write (default ``sys.stderr``).
            live: show the refreshed line (default: when ``stream`` is a terminal).

        """
        self.stream = stream if stream is not None else sys.stderr
        self.total = total
        isatty = getattr(self.stream, 'isatty', lambda: False)
        self.live = bool(isatty()) if live is None else live
        self._bar: Any = None
        self._last = 0.0
        self._width = 0
        if self.live:
            try:
                from tqdm import tqdm
            except ImportError:
                self._bar = None
            else:
                self._bar = tqdm(total=round(total, 2), file=self.stream, unit='s',
                                 bar_format='{desc} |{bar:20}| {n:5.1f}/{total:.1f} s '
                                            '[{elapsed}]', desc='demo',
                                 ncols=shutil.get_terminal_size().columns, leave=False)

    def update(self, t: float, lateral: float, state: str, force: bool = False) -> None:
        """Show simulated time ``t`` [s], lateral offset [m] and the controller's state."""
        if not self.live:
            return
        now = time.monotonic()
        if not force and now - self._last < REFRESH:
            return
        self._last = now
        status = f'y {lateral:+.3f} m  {state or "-":<9}'
        if self._bar is not None:
            self._bar.n = round(min(t, self.total), 2)
            self._bar.set_description_str(f'demo  {status}', refresh=False)
            self._bar.refresh()
            return
        text = f'demo  {status}  {t:5.1f}/{self.total:.1f} s'
        self._width = max(self._width, len(text))
        self.stream.write('\r' + text.ljust(self._width))
        self.stream.flush()

    def note(self, text: str) -> None:
        """Print one event line (above the progress line)."""
        if self._bar is not None:
            self._bar.write(text, file=self.stream)
            return
        if self.live and self._width:
            self.stream.write('\r' + ' ' * self._width + '\r')
        self.stream.write(text + '\n')
        self.stream.flush()

    def close(self) -> None:
        """Remove the progress line."""
        if self._bar is not None:
            self._bar.close()
            self._bar = None
        elif self.live and self._width:
            self.stream.write('\r' + ' ' * self._width + '\r')
            self.stream.flush()
