"""Data shipped inside the package: the invented demo stockroom (see README.md here).

Read it through :func:`demo_stockroom`, which works the same from the source tree, an
installed wheel or a zip, because it goes through :mod:`importlib.resources`.
"""

from __future__ import annotations

from importlib.resources import files
from importlib.resources.abc import Traversable

DEMO_STOCKROOM = "demo_stockroom.csv"


def demo_stockroom() -> Traversable:
    """The invented demo stockroom CSV as a package resource.

    Returns
    -------
    Traversable
        The resource; ``.read_text(encoding="utf-8")`` gives the CSV text (header row =
        the field names of :mod:`picker.fields`, values in SI base units).
    """
    return files(__name__) / DEMO_STOCKROOM
