"""Bounds on reading one untrusted file: :class:`ReadLimits` (``[limits]`` in the round file).

The readers of :mod:`roundscore.intake` enforce them: :func:`roundscore.intake.safety.inspect_workbook`
(sizes and parts of a workbook) and :func:`roundscore.intake.isolation.read_many` (a worker's time and
memory).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["ReadLimits", "DEFAULT_LIMITS", "LIMIT_MAX", "MiB"]

MiB = 1 << 20
#: Largest value of each ReadLimits field: far above any real round, and small enough for the system calls
#: that use them (a timeout past about 2.9e5 years overflows the poll timeout; RLIMIT_AS takes a 64-bit size).
LIMIT_MAX: dict[str, int | float] = {
    "max_member_bytes": 4096 * (1 << 20), "max_total_bytes": 16384 * (1 << 20), "max_members": 100_000,
    "timeout_s": 3600.0, "memory_bytes": 65536 * (1 << 20), "max_text_bytes": 4096 * (1 << 20),
}


@dataclass(frozen=True, slots=True, kw_only=True)
class ReadLimits:
    """Bounds on reading one untrusted file.

    Attributes
    ----------
    max_member_bytes : int
        Largest uncompressed size of one part of a workbook (64 MiB: a
        returned form is a few kB, a large long-layout table a few MB).
    max_total_bytes : int
        Largest uncompressed size of all parts together (256 MiB).
    max_members : int
        Most parts in one workbook (2000; a form has about a dozen).
    timeout_s : float
        Longest time a worker may spend on one file (30 s).
    memory_bytes : int
        Address space a worker may add on top of what it had when it started
        (1 GiB), enforced with ``RLIMIT_AS`` where the system has it.
    max_text_bytes : int
        Largest CSV or text file read (64 MiB).
    """

    max_member_bytes: int = 64 * MiB
    max_total_bytes: int = 256 * MiB
    max_members: int = 2000
    timeout_s: float = 30.0
    memory_bytes: int = 1024 * MiB
    max_text_bytes: int = 64 * MiB

    def __post_init__(self) -> None:
        for name in ("max_member_bytes", "max_total_bytes", "max_members", "memory_bytes", "max_text_bytes"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, int) or not 0 < v <= LIMIT_MAX[name]:
                raise ValueError(f"ReadLimits.{name} must be a whole number from 1 to {LIMIT_MAX[name]}, got {v!r}")
        t = self.timeout_s
        if isinstance(t, bool) or not isinstance(t, (int, float)) or not 0 < t <= LIMIT_MAX["timeout_s"]:
            raise ValueError(f"ReadLimits.timeout_s must be a number of seconds > 0 and at most "
                             f"{LIMIT_MAX['timeout_s']:g}, got {t!r}")


DEFAULT_LIMITS = ReadLimits()
