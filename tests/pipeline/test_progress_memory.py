"""A step's end gives the C allocator's free pages back to the system (glibc's malloc_trim).

Reference: malloc_trim(3), Linux man-pages: "attempts to release free memory from the heap (by
calling sbrk(2) or madvise(2) with suitable arguments)"; since glibc 2.8 it releases free pages
in every arena, not only at the top of the heap. The resident size is the kernel's VmRSS
(proc(5), /proc/self/status).
"""
from __future__ import annotations

import sys

import pytest

from strikeline.pipeline import progress as P

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux") or P._TRIM is None,
                                reason="glibc's malloc_trim: Linux with glibc only")


def _rss_mib() -> float:
    for line in open("/proc/self/status"):
        if line.startswith("VmRSS:"):
            return int(line.split()[1]) / 1024.0
    raise AssertionError("no VmRSS in /proc/self/status")


def test_free_pages_inside_the_heap_go_back_at_a_steps_end():
    # 160 MiB in pieces below glibc's mmap threshold (128 KiB by default), so they come from the
    # heap; a piece allocated after them pins the heap's top, so free() alone cannot shrink it
    pieces = [bytearray(64 * 1024) for _ in range(2560)]
    pin = bytearray(64 * 1024)
    del pieces
    held = _rss_mib()
    tracker = P.RunProgress(steps=("a", "b"))
    tracker.step("a")
    tracker.step("b")  # ends step "a"
    freed = held - _rss_mib()
    assert freed > 100.0, f"only {freed:.0f} MiB of 160 MiB free went back"
    del pin
