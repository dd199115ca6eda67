"""CSV export of journalled measurements: one row per measurement, metrics as columns.

Columns: the journal fields (``acquire.station.records.COLUMNS``), then one column per
other metric in base units (Hz, dB, plain ratios); empty where a measurement has no such
value. Every column has a stable snake_case id (``column_id``): the base metrics' keys as
they are, a check's metric its check, segment and quantity in snake_case (``patch-2g45
[in band] worst return_loss`` -> ``patch_2g45_in_band_worst_return_loss``).
RFC 4180 quoting (Python's ``csv`` module, ``excel`` dialect), line ends CR LF.
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Sequence

from acquire.station.records import COLUMNS, Record, metric_order


def csv_text(records: Sequence[Record]) -> str:
    metrics = [m for m in metric_order(records) if m.key not in COLUMNS]
    buf = io.StringIO()
    writer = csv.writer(buf)
    writer.writerow(column_ids([*COLUMNS, *(m.key for m in metrics)]))
    for rec in records:
        row = ["" if rec[c] is None else rec[c] for c in COLUMNS]
        row += [_number(rec.values.get(m.key)) for m in metrics]
        writer.writerow(row)
    return buf.getvalue()


def _number(value: float | None) -> str:
    return "" if value is None else repr(float(value))


def column_id(key: str) -> str:
    """A metric key as a snake_case column id: lower case, runs of anything but letters
    and digits as one ``_``; an id that would start with a digit gets ``m_`` in front."""
    text = re.sub(r"[^a-z0-9]+", "_", key.lower()).strip("_") or "metric"
    return f"m_{text}" if text[0].isdigit() else text


def column_ids(keys: Sequence[str]) -> list[str]:
    """Column ids for a header, unique (a clash gets ``_2``, ``_3``, ...)."""
    ids: list[str] = []
    for key in keys:
        base = candidate = column_id(key)
        n = 2
        while candidate in ids:
            candidate, n = f"{base}_{n}", n + 1
        ids.append(candidate)
    return ids
