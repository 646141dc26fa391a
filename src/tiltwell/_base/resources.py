"""What a request costs before it starts: memory against what this machine has free.

A request that cannot fit (10^8 tracked particles, a 2400-dpi poster) is refused at once
with its estimate and the limit, instead of failing after minutes with a MemoryError or
driving the machine into swap. The estimates are per-item costs measured on tiltwell's own
calls (tracemalloc peaks), rounded up.
"""

from __future__ import annotations

import os

from .validation import TiltwellError

__all__ = ["BYTES_PER_PARTICLE", "BYTES_PER_PIXEL", "MEMORY_SHARE", "available_memory", "check_memory"]

#: Peak memory of one sampled and tracked particle [bytes]: 212 B at 8e4 particles through
#: capture_estimates (tracemalloc, measured), rounded up.
BYTES_PER_PARTICLE = 256

#: Peak memory of one rendered pixel of a figure [bytes]: RGBA at 4 B, with the canvas, its
#: copy and the encoder's buffers (matplotlib's Agg), rounded up (common practice, no source).
BYTES_PER_PIXEL = 16

#: Share of the free memory one request may take.
MEMORY_SHARE = 0.5

_GIB = 2.0**30


def available_memory() -> int:
    """Free memory of this machine [bytes]: ``MemAvailable`` of ``/proc/meminfo`` (Linux),
    else free pages times the page size, else 4 GiB."""
    try:
        with open("/proc/meminfo", encoding="ascii") as info:
            for line in info:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
    except (OSError, ValueError, AttributeError):
        return int(4 * _GIB)


def check_memory(needed: float, what: str, fix: str, argument: str | None = None) -> None:
    """Raise a TiltwellError when ``needed`` bytes exceed :data:`MEMORY_SHARE` of the free
    memory: ``what`` names the request, ``fix`` says what to ask for instead, ``argument``
    the argument that asked for it (the error's ``argument``)."""
    free = available_memory()
    limit = MEMORY_SHARE * free
    if needed > limit:
        raise TiltwellError(f"{what} needs about {needed / _GIB:.3g} GiB of memory; this machine has "
                            f"{free / _GIB:.3g} GiB free and a request may take {limit / _GIB:.3g} GiB: {fix}",
                            argument=argument)
