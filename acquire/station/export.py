"""CSV export of journalled measurements: one row per measurement, metrics as columns.

Columns: the journal fields (``acquire.station.records.COLUMNS``), then one column per
other metric in base units (Hz, dB, plain ratios), named by its key; empty where a
measurement has no such value. RFC 4180 quoting (Python's ``csv`` module, ``excel``
dialect), line ends CR LF.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Sequence

from acquire.station.records import COLUMNS, Record, metric_order


def csv_text(records: Sequence[Record]) -> str:
    metrics = [m for m in metric_order(records) if m.key not in COLUMNS]
    buf = io.StringIO()
    writer = csv.writer(buf)
    writer.writerow([*COLUMNS, *(m.key for m in metrics)])
    for rec in records:
        row = ["" if rec[c] is None else rec[c] for c in COLUMNS]
        row += [_number(rec.values.get(m.key)) for m in metrics]
        writer.writerow(row)
    return buf.getvalue()


def _number(value: float | None) -> str:
    return "" if value is None else repr(float(value))
