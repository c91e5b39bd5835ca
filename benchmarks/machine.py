"""What machine a benchmark ran on, for the figures' caption."""

from __future__ import annotations

import platform


def cpu_model() -> str:
    """The CPU model name from /proc/cpuinfo (or what platform knows)."""
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"
