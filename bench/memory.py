"""Arrays for timing, each in its own 2 MiB-aligned anonymous mapping advised for huge pages.

Whether a large array sits on transparent huge pages changes how fast it streams (about 15-25 %
for np.add at N = 10^6 on this project's VMs, measured with `numpy._core.multiarray.
_set_madvise_hugepage`), and numpy's own allocations get them or not by the luck of the heap:
glibc serves a 32 MB array from an mmap or from a reused, fragmented heap, and huge pages cover
only the 2 MiB-aligned middle of a mapping.  A kernel's arrays and its streaming baseline's
could then sit on different pages and their ratio flip between runs.  So every array a timed
implementation touches comes from `array`: its own mapping, aligned to 2 MiB, `MADV_HUGEPAGE`
where the platform has it, written once (so no page fault is timed).  `huge_share` reads
/proc/self/smaps to report how much of them the kernel did back with huge pages.
"""
from __future__ import annotations

import mmap
from pathlib import Path

import numpy as np

HUGE = 2 << 20


def array(shape, fill: float = 0.0) -> np.ndarray:
    """A C-contiguous float64 array of `shape`, filled with `fill`, on its own aligned mapping."""
    count = int(np.prod(shape))
    nbytes = max(count, 1) * 8
    region = mmap.mmap(-1, nbytes + HUGE, flags=mmap.MAP_PRIVATE)   # anonymous, private: THP applies
    if hasattr(mmap, "MADV_HUGEPAGE"):
        region.madvise(mmap.MADV_HUGEPAGE)
    raw = np.frombuffer(region, dtype=np.uint8)
    start = (-raw.ctypes.data) % HUGE
    out = raw[start:start + count * 8].view(np.float64).reshape(shape)
    out.fill(fill)
    return out


def like(x: np.ndarray) -> np.ndarray:
    """A copy of `x` in an array from `array`."""
    out = array(x.shape)
    out[...] = x
    return out


def huge_share(arrays) -> float | None:
    """Fraction of the arrays' bytes backed by huge pages (None where /proc/self/smaps is absent)."""
    smaps = Path("/proc/self/smaps")
    if not smaps.exists():
        return None
    regions, current = [], None
    for line in smaps.read_text().splitlines():
        head = line.split(maxsplit=1)[0]
        if "-" in head and not head.endswith(":"):
            lo, hi = (int(v, 16) for v in head.split("-"))
            current = [lo, hi, 0]
            regions.append(current)
        elif head == "AnonHugePages:" and current is not None:
            current[2] = int(line.split()[1]) * 1024
    total = covered = 0
    for x in arrays:
        at, size = x.ctypes.data, x.nbytes
        total += size
        for lo, hi, huge in regions:
            if lo <= at < hi:
                covered += min(size, huge)
                break
    return covered / total if total else None
