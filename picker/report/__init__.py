"""Rendering: tables, JSON, CSV, plots and notes. No physics and no SQL here."""
