"""The stage types by topology name: ``register`` adds one, ``stage`` builds a stage."""

from __future__ import annotations

from typing import TYPE_CHECKING

from picker.errors import BadRequirement
from picker.stages.base import Stage, StageType

if TYPE_CHECKING:
    from picker.design.requirement import Requirement

_KINDS: dict[str, StageType] = {}


def register(kind: StageType) -> StageType:
    """Add (or replace) the stage type for ``kind.name``; returns it."""
    _KINDS[kind.name] = kind
    return kind


def unregister(name: str) -> None:
    """Remove the stage type ``name`` (a type added for a while, e.g. in a test)."""
    _KINDS.pop(name, None)


def kinds() -> dict[str, StageType]:
    """Every registered stage type by topology name, in registration order."""
    return dict(_KINDS)


def kind(topology: str) -> StageType:
    """The stage type of ``topology``; BadRequirement naming the known ones otherwise."""
    try:
        return _KINDS[topology]
    except KeyError:
        raise BadRequirement(f"--topology: {topology!r} is not a topology; use one of "
                             + ", ".join(_KINDS)) from None


def stage(req: Requirement) -> Stage:
    """The stage of a requirement, built by its topology's stage type."""
    return kind(req.topology).build(req)


__all__ = ["kind", "kinds", "register", "stage", "unregister"]
