"""What machine a benchmark ran on (printed beside every figure)."""

import platform


def cpu_model() -> str:
    """The CPU's model name from /proc/cpuinfo, else what platform knows."""
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown CPU"
