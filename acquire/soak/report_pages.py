"""The soak report's words: the plain-text summary and the HTML page (from the facts that
``acquire.soak.report`` gathers). Kept Touchstone files are linked relative to the report
folder, so the two can be moved together."""

from __future__ import annotations

import html
import os
from pathlib import Path
from typing import Any


def report_text(f: dict[str, Any]) -> str:
    kept = f["kept"]
    lines = [
        f"Soak report {f['job']}: plan {f['plan']}",
        "",
        "Instrument:", *(f"  {line}" for line in f["instrument"]),
        "Calibration:", *(f"  {line}" for line in f["calibration"]),
        f"State: {f['state']} (journal {f['run']}: {f['run_state']})",
        f"Started {f['started']}, ended {f['ended'] or 'not yet'}",
        f"Schedule: {f['schedule']}",
        f"Sweeps: {f['sweeps']}",
        f"Verdicts: {f['verdicts']}",
        "",
        "Drift from the reference:",
        *(f"  {line}" for line in f["drift"]),
        f"Alarms: {len(f['alarms'])}",
        *(f"  {line}" for line in f["alarms"][-20:]),
        f"Faults: {len(f['faults'])}" + (f" ({f['faults_by_kind']})" if f["faults"] else ""),
        *(f"  {line}" for line in f["faults"][-20:]),
        f"Files kept: {len(kept)} Touchstone file(s) in {f['data_dir']}",
        *(f"  sweep {seq}: {path.name}" for seq, path in kept[:5]),
        *(["  ..."] if len(kept) > 10 else []),
        *(f"  sweep {seq}: {path.name}" for seq, path in kept[max(5, len(kept) - 5):]),
    ]
    return "\n".join(lines)


def _link(path: Path, folder: Path) -> str:
    """A link to a kept file that works from the report folder when both are moved
    together (relative), else an absolute file URL."""
    try:
        return Path(os.path.relpath(path, folder)).as_posix()
    except ValueError:
        return path.resolve().as_uri()


def report_html(f: dict[str, Any], pictures: dict[str, Path], folder: Path) -> str:
    e = html.escape
    rows = "".join(f"<tr><th>{e(k)}</th><td>{e(str(v))}</td></tr>" for k, v in (
        ("Plan", f["plan"]), ("Instrument", "; ".join(f["instrument"])),
        ("Calibration", "; ".join(f["calibration"])), ("State", f["state"]),
        ("Started", f["started"]), ("Ended", f["ended"] or "not yet"),
        ("Schedule", f["schedule"]), ("Sweeps", f["sweeps"]), ("Verdicts", f["verdicts"]),
        ("Journal", f["run"]), ("Data folder", f["data_dir"])))

    def items(lines: list[str]) -> str:
        return "<ul>" + "".join(f"<li>{e(x)}</li>" for x in lines) + "</ul>" if lines \
            else "<p>none</p>"

    kept = "".join(f'<li>sweep {seq}: <a href="{e(_link(path, folder))}">{e(path.name)}</a>'
                   "</li>" for seq, path in f["kept"])
    headings = {"drift": "Drift against time", "allan": "Stability of the resonance "
                "(Allan deviation)", "deviation": "Change from the reference by frequency"}
    images = "".join(f'<h2>{e(headings.get(name, name))}</h2>'
                     f'<img src="{e(path.name)}" alt="{e(headings.get(name, name))}">'
                     for name, path in pictures.items())
    return (
        "<!DOCTYPE html>\n<html><head><meta charset=\"utf-8\">"
        f"<title>Soak report {e(f['job'])}</title><style>body{{font-family:sans-serif;"
        "max-width:1100px;margin:1em auto}th{text-align:left;padding-right:1em;"
        "vertical-align:top}img{max-width:100%}</style></head><body>"
        f"<h1>Soak report {e(f['job'])}</h1><table>{rows}</table>"
        f"<h2>Drift from the reference</h2>{items(f['drift'])}"
        f"<h2>Alarms ({len(f['alarms'])})</h2>{items(f['alarms'])}"
        f"<h2>Faults ({len(f['faults'])})</h2>{items(f['faults'][-200:])}"
        f"{images}"
        f"<h2>Touchstone files kept ({len(f['kept'])})</h2>"
        f"{'<ul>' + kept + '</ul>' if kept else '<p>none</p>'}</body></html>\n"
    )
