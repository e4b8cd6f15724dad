"""Shared helpers for the tests."""
from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
FIXTURES = ROOT / "fixtures"


def only_parentheses_inserted(new: bytes, old: bytes) -> bool:
    """True when ``new`` is ``old`` with only '(' and ')' bytes inserted (a chain edit)."""
    position = 0
    for byte in new:
        if position < len(old) and byte == old[position]:
            position += 1
        elif byte not in b"()":
            return False
    return position == len(old)


@pytest.fixture
def fixtures() -> Path:
    return FIXTURES


def module(body: str, declarations: str = "real(dp) :: a, b, c, d, e, x, y, z\n    integer :: i, j, k, n") -> str:
    """A compilable module around executable statements."""
    return (
        "module sample\n  implicit none\n  integer, parameter :: dp = kind(1.0d0)\ncontains\n"
        f"  subroutine work()\n    {declarations}\n"
        + "".join(f"    {line}\n" for line in body.strip("\n").splitlines())
        + "  end subroutine work\nend module sample\n"
    )
