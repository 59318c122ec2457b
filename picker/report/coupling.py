"""The AC-coupling design as text lines (spec, why, net): picker.design.coupling.Coupling."""

from __future__ import annotations

from typing import Any


def coupling_lines(coupling: Any) -> list[str]:
    """``coupling.rows()`` as indented ``what: value`` lines under a heading ([]: none)."""
    if coupling is None:
        return []
    rows = coupling.rows()
    width = max(len(k) for k, _ in rows)
    return ["AC coupling (designed):", *[f"  {k.ljust(width)}  {v}" for k, v in rows]]


__all__ = ["coupling_lines"]
