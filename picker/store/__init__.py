"""The stockroom database: tables, migrations and the repository API."""

from picker.store.repo import Condition, ImportReport, Store

__all__ = ["Condition", "ImportReport", "Store"]
