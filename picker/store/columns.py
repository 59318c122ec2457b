"""Reading parts into column arrays: the lean path from the database to the checks.

Rows come straight from the DBAPI cursor in chunks (no SQLAlchemy row objects, no
pandas) and are written column by column into arrays sized by a COUNT first, so
reading a million parts needs little more memory than the arrays themselves. Numbers
become float64 with NaN for unknown; text stays Python str; ``updated_at`` goes
through SQLAlchemy's own conversion for the dialect, and only when it is asked for.
Rows come ordered by label. ``available`` (picker.fields.DERIVED) is computed by the
database as ``qty - reserved``: packages on hand that no project has reserved.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from picker.fields import NUMERIC, TECH_IB_DOUBLE_C

if TYPE_CHECKING:
    import numpy as np
    import numpy.typing as npt
    from sqlalchemy.engine import Engine

CHUNK_ROWS = 5_000


def read_columns(engine: Engine, names: Sequence[str], where: Sequence[Any] = ()
                 ) -> tuple[npt.NDArray[np.object_], dict[str, npt.NDArray[Any]]]:
    """Labels and the named columns of the parts matching ``where`` (SQL clauses).

    Numeric fields come as float64 arrays (NaN = unknown), the others as object arrays.
    """
    import numpy as np
    from sqlalchemy import func, select

    from picker.store.models import parts

    names = [n for n in dict.fromkeys(names) if n != "label"]
    numeric = [n for n in names if n in NUMERIC]
    other = [n for n in names if n not in NUMERIC]
    order = [*numeric, *other]
    stmt = select(parts.c.label, *[column(n) for n in order]).where(*where)
    with engine.connect() as conn:
        total = int(conn.execute(select(func.count()).select_from(parts).where(*where))
                    .scalar_one())
        labels = np.empty(total, dtype=object)
        nums = np.full((len(numeric), total), np.nan)
        texts = np.empty((len(other), total), dtype=object)
        result = conn.execute(stmt.order_by(parts.c.label))
        cursor = result.cursor  # raw tuples: SQLAlchemy's per-row work is not needed here
        pos = 0
        try:
            while rows := cursor.fetchmany(CHUNK_ROWS):
                block = np.array(rows, dtype=object).reshape(len(rows), 1 + len(order))
                end = pos + len(rows)
                if end > labels.shape[0]:  # rows added since the count: make room
                    extra = end - labels.shape[0] + CHUNK_ROWS
                    labels = np.concatenate([labels, np.empty(extra, dtype=object)])
                    nums = np.concatenate([nums, np.full((len(numeric), extra), np.nan)], 1)
                    texts = np.concatenate([texts, np.empty((len(other), extra), object)], 1)
                labels[pos:end] = block[:, 0]
                if numeric:
                    nums[:, pos:end] = block[:, 1:1 + len(numeric)].T.astype(float)
                if other:
                    texts[:, pos:end] = block[:, 1 + len(numeric):].T
                pos = end
        finally:
            result.close()
        dialect = conn.dialect
    cols: dict[str, npt.NDArray[Any]] = {n: nums[j, :pos] for j, n in enumerate(numeric)}
    for j, n in enumerate(other):
        cols[n] = _converted(parts.c[n].type, dialect, texts[j, :pos])
    return labels[:pos], {n: cols[n] for n in names}


def column(name: str) -> Any:
    """The SQL expression of a part field: a stored column, or a derived number."""
    from picker.store.models import parts

    if name == "available":
        return (parts.c.qty - parts.c.reserved).label("available")
    if name == "ib_tech_double_c":  # picker.fields.tech_ib_double_c, in SQL
        from sqlalchemy import case, func, literal

        tech = func.lower(func.coalesce(parts.c.tech, ""))
        return case(*[(tech.like(f"%{word}%"), literal(v)) for word, v in TECH_IB_DOUBLE_C],
                    else_=None).label(name)
    return parts.c[name]


def _converted(sqltype: Any, dialect: Any, values: npt.NDArray[Any]) -> npt.NDArray[Any]:
    """Values as SQLAlchemy would return them (e.g. SQLite's text dates as datetimes)."""
    proc = sqltype.dialect_impl(dialect).result_processor(dialect, None)
    if proc is None:
        return values
    import numpy as np

    out = np.empty(len(values), dtype=object)
    out[:] = [proc(v) for v in values.tolist()]
    return out


__all__ = ["CHUNK_ROWS", "column", "read_columns"]
