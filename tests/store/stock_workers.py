"""Worker processes for the concurrency tests (module-level so `spawn` can import them).

Each worker opens its own Store (its own connections, as a second user would), waits
at a barrier so all start together, runs its movements and reports what it saw:
successes, clean refusals (PickerError) and anything else (an unhandled error, which
the tests require to be absent).
"""

from __future__ import annotations

import random
import time
import traceback
from typing import Any


def takes(url: str, label: str, n: int, project: str, barrier: Any, out: Any) -> None:
    """n takes of 1 package each."""
    from picker.errors import PickerError
    from picker.store import Store, stock

    report: dict[str, Any] = {"project": project, "ok": 0, "refused": [], "errors": [],
                              "seconds": 0.0}
    try:
        store = Store.open(url)
        barrier.wait(timeout=60)
        t0 = time.perf_counter()
        for _ in range(n):
            try:
                stock.take(store, label, 1, project, f"worker-{project}")
                report["ok"] += 1
            except PickerError as exc:
                report["refused"].append(str(exc))
        report["seconds"] = time.perf_counter() - t0
        store.dispose()
    except BaseException:  # reported to the test, which fails on it
        report["errors"].append(traceback.format_exc())
    out.put(report)


def mixed(url: str, label: str, n: int, project: str, seed: int, barrier: Any,
          out: Any) -> None:
    """n random takes (1..3) and returns (of what this worker has out) for one project."""
    from picker.errors import Conflict, PickerError
    from picker.store import Store, stock

    rng = random.Random(seed)
    report: dict[str, Any] = {"project": project, "ok": 0, "refused": [], "errors": [],
                              "net": 0, "seconds": 0.0}
    try:
        store = Store.open(url)
        barrier.wait(timeout=60)
        t0 = time.perf_counter()
        out_now = 0
        for _ in range(n):
            k = rng.randint(1, 3)
            try:
                if out_now >= k and rng.random() < 0.45:
                    stock.return_(store, label, k, project, f"worker-{project}")
                    out_now -= k
                    report["net"] += k
                else:
                    stock.take(store, label, k, project, f"worker-{project}")
                    out_now += k
                    report["net"] -= k
                report["ok"] += 1
            except Conflict as exc:
                report["refused"].append(str(exc))
            except PickerError as exc:  # anything else the store refuses is a failure
                report["errors"].append(repr(exc))
        report["seconds"] = time.perf_counter() - t0
        store.dispose()
    except BaseException:
        report["errors"].append(traceback.format_exc())
    out.put(report)


def writer(url: str, label: str, n: int, started: Any, out: Any) -> None:
    """Keep writing (n takes of 1) while a backup runs; signal once writing has begun."""
    from picker.store import Store, stock

    report: dict[str, Any] = {"ok": 0, "errors": []}
    try:
        store = Store.open(url)
        for i in range(n):
            stock.take(store, label, 1, "backup-test", "writer")
            report["ok"] += 1
            if i == 10:
                started.set()
        store.dispose()
    except BaseException:
        report["errors"].append(traceback.format_exc())
    started.set()
    out.put(report)


def reservations_mix(url: str, labels: list[str], n: int, project: str, seed: int,
                     barrier: Any, out: Any) -> None:
    """n random movements for one project over a few parts: takes, reserves, releases and
    issues of what this project reserved, and now and then `parts edit qty=`.

    A take or reserve may be refused when too few are available and an edit when it
    would go below what is reserved (clean Conflicts); a release or issue of this
    project's own reservation must never be refused (no other process touches it).
    """
    from picker.errors import Conflict, PickerError
    from picker.store import Store, reservations, stock

    rng = random.Random(seed)
    report: dict[str, Any] = {"project": project, "ok": {}, "refused": [], "errors": [],
                              "held": {}, "seconds": 0.0}
    held = dict.fromkeys(labels, 0)
    try:
        store = Store.open(url)
        barrier.wait(timeout=60)
        t0 = time.perf_counter()
        for _ in range(n):
            label = rng.choice(labels)
            k = rng.randint(1, 3)
            roll = rng.random()
            if roll < 0.05:
                kind = "edit"
            elif held[label] >= k and roll < 0.45:
                kind = "issue" if roll < 0.25 else "release"
            else:
                kind = "take" if roll < 0.7 else "reserve"
            by = f"worker-{project}"
            try:
                if kind == "edit":
                    store.edit(label, {"qty": rng.randint(20, 60)}, by=by)
                elif kind == "take":
                    stock.take(store, label, k, project, by)
                elif kind == "reserve":
                    reservations.reserve(store, label, k, project, by)
                    held[label] += k
                elif kind == "release":
                    reservations.release(store, label, k, project, by)
                    held[label] -= k
                else:
                    reservations.issue(store, label, k, project, by)
                    held[label] -= k
                report["ok"][kind] = report["ok"].get(kind, 0) + 1
            except Conflict as exc:
                if kind in ("release", "issue"):
                    report["errors"].append(f"{kind} refused: {exc}")
                else:
                    report["refused"].append(f"{kind}: {exc}")
            except PickerError as exc:
                report["errors"].append(repr(exc))
        report["seconds"] = time.perf_counter() - t0
        report["held"] = held
        store.dispose()
    except BaseException:
        report["errors"].append(traceback.format_exc())
    out.put(report)


def updater(url: str, label: str, n: int, seed: int, barrier: Any, out: Any) -> None:
    """n imports with update=True, each setting the part's quantity to a random number
    (what `picker parts import --update` does for a file with a qty column)."""
    from picker.store import Store

    rng = random.Random(seed)
    report: dict[str, Any] = {"ok": 0, "refused": [], "errors": [], "seconds": 0.0}
    try:
        store = Store.open(url)
        barrier.wait(timeout=60)
        t0 = time.perf_counter()
        for _ in range(n):
            store.import_records([{"label": label, "qty": rng.randint(100, 400)}],
                                 update=True, by="updater")
            report["ok"] += 1
        report["seconds"] = time.perf_counter() - t0
        store.dispose()
    except BaseException:
        report["errors"].append(traceback.format_exc())
    out.put(report)
