"""Progress display while a study runs: phases with elapsed time, and Ipopt iterations.

On a terminal the iteration line is rewritten in place (``\\r``); otherwise one line
is printed every :data:`EVERY` iterations. Output goes to stderr so that stdout holds
only the summary.
"""

from __future__ import annotations

import sys
import time

EVERY = 10


class Progress:
    """Callable progress sink: ``phase(text)`` and ``iteration(info)`` (Ipopt callback)."""

    def __init__(self, stream=None, enabled: bool = True):
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = enabled
        self.t0 = time.perf_counter()
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self._open_line = False
        self.label = ""

    def _elapsed(self) -> str:
        return f"[{time.perf_counter() - self.t0:6.1f} s]"

    def _end_line(self) -> None:
        if self._open_line:
            self.stream.write("\n")
            self._open_line = False

    def phase(self, text: str) -> None:
        if not self.enabled:
            return
        self._end_line()
        self.stream.write(f"{self._elapsed()} {text}\n")
        self.stream.flush()

    def iteration(self, info) -> bool:
        """Ipopt iteration callback (never asks Ipopt to stop)."""
        if not self.enabled:
            return True
        text = (f"{self._elapsed()} {self.label}iteration {info.iteration:4d}  objective {info.objective:.6g}  "
                f"infeasibility {info.primal_infeasibility:.1e}  optimality {info.dual_infeasibility:.1e}"
                + ("  (restoration)" if info.restoration else ""))
        if self.tty:
            self.stream.write("\r" + text)
            self._open_line = True
            self.stream.flush()
        elif info.iteration % EVERY == 0:
            self.stream.write(text + "\n")
            self.stream.flush()
        return True

    def done(self) -> None:
        self._end_line()


class Silent(Progress):
    def __init__(self):
        super().__init__(enabled=False)


__all__ = ["EVERY", "Progress", "Silent"]
