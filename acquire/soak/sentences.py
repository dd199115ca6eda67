"""Journal rows as sentences a person reads over coffee.

A fault row holds a kind (``timeout``), the driver's message and what sweepd did. The
report turns it into one sentence, e.g. "03:12:05 UTC, sweep 14: the instrument did not
answer in time (no reply within 0.4 s); what sweepd did: sweep 14 discarded;
retrying." Bytes that a driver quoted as a Python literal (``b'\\x00\\x1f'``) are
shown as text when printable and as hex otherwise, so no program syntax reaches the
reader.
"""

from __future__ import annotations

import ast
import re
from typing import Any

FAULT_WORDS = {
    "connect": "the instrument could not be reached",
    "timeout": "the instrument did not answer in time",
    "connection-lost": "the connection to the instrument was lost",
    "bad-block": "the instrument sent a malformed data block",
    "bad-reply": "the instrument sent a reply that could not be read",
    "scpi-error": "the instrument reported an error",
    "setting-mismatch": "the instrument did not hold a setting it was sent",
    "settings-lost": "the instrument had forgotten its settings (it restarted)",
    "dialect": "the instrument's command set did not match its dialect file",
    "calibration": "the calibration could not be used",
    "plan": "the plan could not be followed",
    "storage": "a file could not be written",
    "journal": "the journal could not be written",
    "disk-full": "the disk was nearly full, so capturing was held",
    "disk-ok": "disk space was free again",
    "reconnected": "the instrument answered again",
    "cancel": "the job was cancelled",
    "restart": "sweepd serve resumed the job after an interruption",
    "stop": "sweepd serve stopped",
    "alarm-command": "the alarm command did not run cleanly",
    "missed": "a sweep was missed",
}

_BYTES = re.compile(r"""\bb(['"])((?:\\.|(?!\1).)*)\1""")
_SHOW_AT_MOST = 24


def show_bytes(data: bytes) -> str:
    """Printable ASCII as quoted text, anything else as hex (long payloads cut)."""
    if data and all(32 <= b < 127 for b in data):
        text = data.decode("ascii")
        return f'"{text}"' if len(text) <= 60 else f'"{text[:57]}..." ({len(data)} bytes)'
    shown = " ".join(f"{b:02x}" for b in data[:_SHOW_AT_MOST])
    more = " ..." if len(data) > _SHOW_AT_MOST else ""
    return f"bytes {shown}{more} ({len(data)} byte{'s' if len(data) != 1 else ''})"


def plain_message(text: str) -> str:
    """A driver's message with any Python bytes literal rewritten for people."""

    def rewrite(match: re.Match[str]) -> str:
        try:
            value = ast.literal_eval(match.group(0))
        except (ValueError, SyntaxError):
            return match.group(0)
        return show_bytes(value) if isinstance(value, bytes) else match.group(0)

    return _BYTES.sub(rewrite, " ".join(str(text).split()))


def fault_sentence(row: dict[str, Any]) -> str:
    """One journalled fault as a sentence: when, which sweep, what, what sweepd did."""
    when = str(row.get("time_utc") or "")
    clock = when[11:19] + " UTC" if len(when) >= 19 else when or "at an unknown time"
    where = f", sweep {row['seq']}" if row.get("seq") is not None else ""
    kind = str(row.get("kind") or "error")
    what = FAULT_WORDS.get(kind, f"a fault of kind '{kind}' occurred")
    detail = plain_message(row.get("message") or "")
    action = plain_message(row.get("action") or "")
    sentence = f"{clock}{where}: {what}"
    if detail:
        sentence += f" ({detail})"
    if action:
        sentence += f"; what sweepd did: {action}"
    return sentence.rstrip(".") + "."
