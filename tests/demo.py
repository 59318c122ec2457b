"""Facts about the invented demo stockroom that tests compare with (read from the CSV)."""

from __future__ import annotations

import csv
import io

from picker.data import demo_stockroom

#: How many parameter sets the demo stockroom holds.
DEMO_PARTS = len(list(csv.DictReader(io.StringIO(demo_stockroom().read_text(encoding="utf-8")))))
