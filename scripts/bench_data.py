"""Seeded synthetic stockrooms for scripts/bench (and the tests that check the bench).

Every part is invented: labels ``syn-0000001``..., parameters drawn from plausible,
made-up distributions per input technology (bipolar, JFET, CMOS) in SI base units,
with a few percent of unknown (NULL) values in the optional columns, as a catalogue
imported from several sources would have. Same seed, same stockroom.

``synthetic_columns(n, seed)`` gives the columns as numpy arrays (numeric ones float64,
NaN = unknown); ``synthetic_frame`` wraps them in a DataFrame indexed by label (the
shape Store.parts_frame returns); ``write_sqlite(path, n, seed)`` creates a stockroom
at the current schema and bulk-inserts the rows with sqlite3 in one transaction.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

TECHS = ("bipolar", "JFET", "CMOS")
PACKAGES = ("SO-8", "DIP-8", "MSOP-8", "SOT-23-5", "SO-14", "TSSOP-14")
# optional columns and the share of parts whose value is unknown
MISSING: dict[str, float] = {
    "iq_a": 0.03, "rin_ohm": 0.05, "ib_a": 0.02, "ios_a": 0.06, "vos_v": 0.01,
    "drift_v_per_c": 0.08, "cm_head_pos_v": 0.02, "cm_head_neg_v": 0.02, "rout_ohm": 0.10,
    "iout_a": 0.03, "out_head_pos_v": 0.02, "out_head_neg_v": 0.02, "en_v_per_rthz": 0.05,
    "in_a_per_rthz": 0.08, "price": 0.04, "aol_v_per_v": 0.02, "slew_v_per_s": 0.01,
    "channels": 0.01,
}
UPDATED_AT = "2026-01-15 09:30:00.000000"  # SQLAlchemy's SQLite DateTime text form


def _lognormal(rng: np.random.Generator, median: npt.ArrayLike, sigma: float,
               n: int) -> npt.NDArray[np.float64]:
    return np.asarray(median, dtype=float) * np.exp(sigma * rng.standard_normal(n))


def synthetic_columns(n: int, seed: int = 7) -> dict[str, Any]:
    """n invented op-amp parameter sets as columns (see the module docstring)."""
    rng = np.random.default_rng(seed)
    tech_i = rng.choice(3, size=n, p=[0.45, 0.20, 0.35])
    by_tech = lambda b, j, c: np.array([b, j, c])[tech_i]  # noqa: E731
    gbw = np.clip(_lognormal(rng, by_tech(3e6, 4e6, 5e6), 1.5, n), 1e3, 2e9)
    slew = np.clip(gbw * _lognormal(rng, 0.5, 0.8, n), 1e3, 5e9)
    aol = 10 ** (np.clip(rng.normal(105, 12, n), 60, 150) / 20)
    ib = _lognormal(rng, by_tech(5e-8, 5e-11, 1e-12), 1.0, n)
    vos = np.clip(_lognormal(rng, 1.5e-3, 0.8, n), 5e-6, 2e-2)
    low_v = rng.random(n) < 0.45
    supply_min = np.where(low_v, rng.choice([1.8, 2.2, 2.7, 3.0], n),
                          rng.choice([4.5, 5.0, 7.0, 10.0], n))
    supply_max = np.where(low_v, rng.choice([5.5, 6.0, 12.0, 16.0], n),
                          rng.choice([30.0, 36.0, 40.0, 44.0], n))
    supply_max = np.where(rng.random(n) < 0.02, rng.choice([80.0, 100.0], n), supply_max)
    rri = rng.random(n) < 0.3
    rro = rng.random(n) < 0.4
    cm_pos = np.where(rri, rng.uniform(-0.3, 0.1, n), rng.uniform(0.5, 3.0, n))
    cm_neg = np.where(rri, rng.uniform(-0.3, 0.1, n), rng.uniform(0.5, 3.0, n))
    qty = np.where(rng.random(n) < 0.2, 0, rng.geometric(1 / 40, n)).astype(float)
    cols: dict[str, Any] = {
        "label": np.array([f"syn-{i:07d}" for i in range(1, n + 1)], dtype=object),
        "description": np.array([f"synthetic {TECHS[t]} op-amp" for t in tech_i], dtype=object),
        "tech": np.array(TECHS, dtype=object)[tech_i],
        "channels": rng.choice([1.0, 2.0, 4.0], n, p=[0.5, 0.35, 0.15]),
        "package": np.array(PACKAGES, dtype=object)[rng.integers(0, len(PACKAGES), n)],
        "supply_min_v": supply_min,
        "supply_max_v": supply_max,
        "iq_a": np.clip(_lognormal(rng, 1e-3, 1.2, n), 5e-7, 3e-2),
        "gbw_hz": gbw,
        "slew_v_per_s": slew,
        "aol_v_per_v": aol,
        "rin_ohm": _lognormal(rng, by_tech(2e6, 1e12, 1e12), 1.0, n),
        "ib_a": ib,
        "ios_a": ib * rng.uniform(0.05, 0.5, n),
        "vos_v": vos,
        "drift_v_per_c": vos * _lognormal(rng, 3e-3, 0.6, n),
        "cm_head_pos_v": cm_pos,
        "cm_head_neg_v": cm_neg,
        "rout_ohm": _lognormal(rng, 80.0, 1.0, n),
        "iout_a": np.clip(_lognormal(rng, 0.025, 0.6, n), 1e-3, 0.5),
        "out_head_pos_v": np.where(rro, rng.uniform(0.02, 0.2, n), rng.uniform(0.8, 2.5, n)),
        "out_head_neg_v": np.where(rro, rng.uniform(0.02, 0.2, n), rng.uniform(0.8, 2.5, n)),
        "en_v_per_rthz": _lognormal(rng, by_tech(1e-8, 1.5e-8, 2.5e-8), 0.7, n),
        "in_a_per_rthz": _lognormal(rng, by_tech(5e-13, 3e-15, 2e-15), 0.8, n),
        "price": np.round(_lognormal(rng, 1.0, 0.8, n), 2),
        "qty": qty,
        "reorder_level": np.where(rng.random(n) < 0.5, np.nan, rng.integers(5, 21, n)),
        "location": np.array([f"S{i % 40:02d}-{i % 97:02d}" for i in range(n)], dtype=object),
        "notes": np.full(n, None, dtype=object),
    }
    for name, share in MISSING.items():
        cols[name] = np.where(rng.random(n) < share, np.nan, cols[name])
    # fields of schema 0004, drawn from their own stream so the columns above stay as they were
    rng2 = np.random.default_rng(seed + 1)
    for name in ("out_rsat_pos_ohm", "out_rsat_neg_ohm"):
        cols[name] = np.where(rng2.random(n) < 0.05, np.nan, _lognormal(rng2, 40.0, 0.8, n))
    cols["ib_double_c"] = np.where(rng2.random(n) < 0.6, np.nan,
                                   by_tech(-80.0, 10.0, 10.0) * rng2.uniform(0.8, 1.2, n))
    # cmrr_db (schema 0005), from its own stream so the columns above stay as they were
    rng_cmrr = np.random.default_rng(seed + 13)
    cols["cmrr_db"] = np.where(rng_cmrr.random(n) < 0.15, np.nan,
                               rng_cmrr.uniform(60.0, 130.0, n))
    # heat, input protection and supply rejection (schema 0005), their own stream again
    rng3 = np.random.default_rng(seed + 2)
    cols["theta_ja_c_per_w"] = np.where(rng3.random(n) < 0.05, np.nan,
                                        rng3.choice([55.0, 100.0, 150.0, 210.0], n))
    cols["tj_max_c"] = np.where(rng3.random(n) < 0.05, np.nan,
                                rng3.choice([125.0, 150.0], n, p=[0.3, 0.7]))
    cols["vdiff_max_v"] = np.where(rng3.random(n) < 0.05, np.nan,
                                   np.where(rng3.random(n) < 0.2, 0.7, supply_max))
    cols["psrr_db"] = np.where(rng3.random(n) < 0.1, np.nan, rng3.uniform(60.0, 130.0, n))
    # stability fields of schema 0005, from a fourth stream: follower phase margin (a few
    # parts decompensated: low margin and a minimum noise gain), input capacitances
    rng4 = np.random.default_rng(seed + 3)
    decomp = rng4.random(n) < 0.05
    pm = np.where(decomp, rng4.uniform(15.0, 35.0, n), rng4.uniform(45.0, 75.0, n))
    cols["pm_unity_deg"] = np.where(rng4.random(n) < 0.05, np.nan, pm)
    cols["min_noise_gain"] = np.where(decomp, rng4.choice([2.0, 5.0, 10.0], n), np.nan)
    for name in ("cin_diff_f", "cin_cm_f"):
        cols[name] = np.where(rng4.random(n) < 0.05, np.nan, _lognormal(rng4, 3e-12, 0.5, n))
    return cols


def synthetic_frame(n: int, seed: int = 7, columns: list[str] | None = None) -> Any:
    """The parts as a DataFrame indexed by label (like Store.parts_frame)."""
    import pandas as pd

    cols = synthetic_columns(n, seed)
    keep = [c for c in cols if c != "label" and (columns is None or c in columns)]
    return pd.DataFrame({c: cols[c] for c in keep},
                        index=pd.Index(cols["label"], name="label"))


def write_sqlite(path: Path, n: int, seed: int = 7) -> Path:
    """A fresh SQLite stockroom at ``path`` (current schema) holding n synthetic parts."""
    from picker.fields import FIELDS
    from picker.store import Store

    path = Path(path)
    if path.exists():
        path.unlink()
    store = Store.create(f"sqlite:///{path}")
    store.dispose()
    cols = synthetic_columns(n, seed)
    names = [f.name for f in FIELDS]
    ints = {f.name for f in FIELDS if f.kind == "count"}
    # sqlite3 stores a NaN as NULL; integer columns get Python ints or None
    data = []
    for name in names:
        values = cols.get(name, np.full(n, np.nan))  # a field not synthesised: unknown
        if name in ints:
            data.append([None if v != v else int(v) for v in values.tolist()])
        else:
            data.append(values.tolist())
    data.append([UPDATED_AT] * n)
    sql = (f"INSERT INTO parts ({', '.join(names)}, updated_at) "
           f"VALUES ({', '.join('?' * (len(names) + 1))})")
    con = sqlite3.connect(path)
    try:
        with con:
            con.executemany(sql, zip(*data, strict=True))
    finally:
        con.close()
    return path


__all__ = ["synthetic_columns", "synthetic_frame", "write_sqlite"]
