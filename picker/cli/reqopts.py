"""The stage requirement options, shared by every command that takes a stage.

``@requirement_options`` adds --topology ... --design to a command and hands them to it
as one mapping, ``stage``; ``build_requirement(stage)`` turns that (plus the design
file, if any) into a picker.design.requirement.Requirement. Command-line values win
over the design file's.
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from typing import Any, TypeVar

import click

from picker.cli.params import QuantityParam, RailsParam
from picker.keys import KEYS as KEY_LIST
from picker.keys import Key

F = TypeVar("F", bound=Callable[..., Any])


def _click_type(key: Key) -> Any:
    """The click parameter type that converts ``key``'s option (picker.keys)."""
    if key.kind == "choice":
        return click.Choice(list(key.choices), case_sensitive=False)
    special = {"text": str, "rails": RailsParam(), "number": click.FloatRange(min=1.0),
               "count": click.IntRange(min=1, max=1_000_000_000)}
    if key.kind in special:
        return special[key.kind]
    return QuantityParam(key.kind, positive=key.positive)  # type: ignore[arg-type]


#: The keys that are options (a design-file table such as ``network`` is not).
_OPTION_KEYS: tuple[Key, ...] = tuple(k for k in KEY_LIST if k.kind != "table")
KEYS: tuple[str, ...] = tuple(k.name.replace("-", "_") for k in _OPTION_KEYS)


def requirement_options(f: F) -> F:
    """Add the requirement options; the command receives them as ``stage`` (a dict)."""

    @functools.wraps(f)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        stage = {k: kwargs.pop(k) for k in (*KEYS, "design")}
        return f(*args, stage=stage, **kwargs)

    cmd: Any = wrapper
    cmd = click.option("--design", metavar="FILE", type=click.Path(dir_okay=False),
                       help="TOML design file with the same keys (options override it)")(cmd)
    for key in reversed(_OPTION_KEYS):
        opt = f"--{key.name}"
        if key.kind == "flag":
            cmd = click.option(f"{opt}/--no-{key.name}", key.name.replace("-", "_"),
                               default=None, help=key.help)(cmd)
        elif key.kind == "list":
            cmd = click.option(opt, key.name.replace("-", "_"), metavar="FIELD=VALUE",
                               multiple=True, help=key.help)(cmd)
        else:
            cmd = click.option(opt, key.name.replace("-", "_"), type=_click_type(key),
                               default=None, help=key.help)(cmd)
    return cmd  # type: ignore[no-any-return]


def build_requirement(stage: dict[str, Any]) -> Any:
    """The Requirement named by the options (and the design file); PickerError if bad.

    The stage as asked: picker.api designs its network (the library's default).
    """
    from picker.design.requirement import requirement_from

    options = {k.replace("_", "-"): v for k, v in stage.items() if k != "design"}
    return requirement_from(options, stage.get("design"))


def save_option(f: F) -> F:
    """--save FILE: write the requirement as given to a design file (see save_requirement)."""
    return click.option(
        "--save", "save", metavar="FILE", type=click.Path(dir_okay=False),
        help="write the requirement as given (design file values, options over them) to "
        "this TOML design file; --design FILE then gives the same result")(f)


def save_requirement(stage: dict[str, Any], path: str | None, db: str | None) -> None:
    """Write ``stage`` as given to ``path`` (replacing it; never the stockroom's files)."""
    if path is None:
        return
    from picker.design.designfile import design_text, write_design
    from picker.design.requirement import given
    from picker.store.engine import resolve_url
    from picker.store.outfile import database_files

    options = {k.replace("_", "-"): v for k, v in stage.items() if k != "design"}
    text = design_text(given(options, stage.get("design")))
    write_design(path, text, database_files(resolve_url(db)), overwrite=True, what="--save")
    click.echo(f"design: {path}", err=True)


__all__ = ["KEYS", "build_requirement", "requirement_options", "save_option",
           "save_requirement"]
