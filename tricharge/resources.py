"""What the machine can give a run: memory, checked before any large allocation.

The numerics (:mod:`tricharge.bem`) estimate how many bytes a solve needs; this module
asks the operating system how many are available and refuses, with advice, a request
that cannot fit, so a run fails in a second with a clear line instead of swapping or
dying with MemoryError after minutes of work.
"""

from __future__ import annotations

import os
from pathlib import Path

from .errors import OptionError

#: Share of the available memory a run may plan to use (the rest is headroom for the
#: interpreter, libraries and estimates that are rough; our choice, no source).
USABLE_SHARE = 0.8


def _meminfo_available() -> int | None:
    try:
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemAvailable:"):
                return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        return None
    return None


def _cgroup_available() -> int | None:
    """Room left under a cgroup v2 memory limit (containers), or None without one."""
    try:
        limit = Path("/sys/fs/cgroup/memory.max").read_text().strip()
        used = int(Path("/sys/fs/cgroup/memory.current").read_text().strip())
    except (OSError, ValueError):
        return None
    return None if limit == "max" else max(int(limit) - used, 0)


def available_memory() -> int | None:
    """Bytes this process can still allocate without swapping, or None when unknown.

    ``TRICHARGE_MEMORY_BYTES`` overrides the figure (tests, shared machines with their
    own budgets).
    """
    override = os.environ.get("TRICHARGE_MEMORY_BYTES")
    if override:
        try:
            value = int(float(override))
        except ValueError:
            raise OptionError(f"TRICHARGE_MEMORY_BYTES={override!r}: give a number of bytes, e.g. 8e9") from None
        if value <= 0:
            raise OptionError(f"TRICHARGE_MEMORY_BYTES={override!r}: give a positive number of bytes")
        return value
    found = [x for x in (_meminfo_available(), _cgroup_available()) if x is not None]
    if not found and hasattr(os, "sysconf"):
        try:
            found.append(os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
        except (ValueError, OSError):
            pass
    return min(found) if found else None


def gib(nbytes: float) -> str:
    """'3.2 GiB' (binary gigabytes, one decimal).

    >>> gib(3.5 * 2**30)
    '3.5 GiB'
    """
    return f"{nbytes / 2**30:.1f} GiB"


def check_memory(needed: float, what: str, advice: str) -> None:
    """Refuse (OptionError) when ``needed`` bytes exceed the usable share of the
    available memory; ``what`` names the request, ``advice`` says what to do instead."""
    available = available_memory()
    if available is None or needed <= USABLE_SHARE * available:
        return
    raise OptionError(f"{what} needs about {gib(needed)} of memory but this machine has {gib(available)} "
                      f"available; {advice}")
