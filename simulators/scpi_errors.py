"""SCPI error codes, the error queue and the IEEE 488.2 status registers.

Codes and texts: SCPI-1999 Vol. 2 ch. 21 and IEEE Std 488.2 (command errors −1xx,
execution errors −2xx, device-specific −3xx, query errors −4xx). The queue holds
``capacity`` entries, oldest first; when full, the newest entry is replaced by
−350 "Queue overflow". ``*RST`` leaves it alone; ``*CLS`` and power-on clear it.
Entries are reported as ``<code>,"<text>[;<detail>]"``.
"""

from __future__ import annotations

import threading
from collections import deque

TEXT: dict[int, str] = {
    0: "No error",
    -100: "Command error", -101: "Invalid character", -102: "Syntax error",
    -103: "Invalid separator", -104: "Data type error", -108: "Parameter not allowed",
    -109: "Missing parameter", -112: "Program mnemonic too long", -113: "Undefined header",
    -114: "Header suffix out of range", -120: "Numeric data error",
    -121: "Invalid character in number", -131: "Invalid suffix", -138: "Suffix not allowed",
    -141: "Invalid character data", -151: "Invalid string data", -161: "Invalid block data",
    -168: "Block data not allowed",
    -200: "Execution error", -211: "Trigger ignored", -213: "Init ignored",
    -220: "Parameter error", -221: "Settings conflict", -222: "Data out of range",
    -223: "Too much data", -224: "Illegal parameter value", -230: "Data corrupt or stale",
    -300: "Device-specific error", -310: "System error", -321: "Out of memory",
    -330: "Self-test failed", -350: "Queue overflow", -363: "Input buffer overrun",
    -400: "Query error", -410: "Query INTERRUPTED", -420: "Query UNTERMINATED",
    -430: "Query DEADLOCKED", -440: "Query UNTERMINATED after indefinite response",
}

# Standard Event Status Register bits (IEEE Std 488.2)
ESR_OPC, ESR_QYE, ESR_DDE, ESR_EXE, ESR_CME, ESR_PON = 0x01, 0x04, 0x08, 0x10, 0x20, 0x80
# Status Byte bits: error queue not empty (SCPI), MAV, ESB, MSS
STB_EAV, STB_MAV, STB_ESB, STB_MSS = 0x04, 0x10, 0x20, 0x40


class ScpiError(Exception):
    """Raised by the parser or a handler; becomes one entry in the error queue."""

    def __init__(self, code: int, detail: str = "") -> None:
        super().__init__(code, detail)
        self.code = code
        self.detail = detail

    def entry(self) -> tuple[int, str]:
        text = TEXT.get(self.code, "Error")
        return self.code, f"{text};{self.detail}" if self.detail else text


def esr_bit(code: int) -> int:
    """The ESR bit an error code sets (by class)."""
    if -199 <= code <= -100:
        return ESR_CME
    if -299 <= code <= -200:
        return ESR_EXE
    if -399 <= code <= -300 or code > 0:
        return ESR_DDE
    if -499 <= code <= -400:
        return ESR_QYE
    return 0


class Status:
    """Error queue plus ESR/ESE/SRE; thread-safe."""

    def __init__(self, capacity: int = 20) -> None:
        self.capacity = capacity
        self._queue: deque[tuple[int, str]] = deque()
        self._lock = threading.Lock()
        self.esr = ESR_PON
        self.ese = 0
        self.sre = 0

    def push(self, code: int, detail: str = "") -> None:
        self.push_entry(ScpiError(code, detail).entry())

    def push_entry(self, entry: tuple[int, str]) -> None:
        with self._lock:
            self.esr |= esr_bit(entry[0])
            if len(self._queue) >= self.capacity:
                self._queue[-1] = (-350, TEXT[-350])
            else:
                self._queue.append(entry)

    def pop(self) -> tuple[int, str]:
        with self._lock:
            return self._queue.popleft() if self._queue else (0, TEXT[0])

    def count(self) -> int:
        with self._lock:
            return len(self._queue)

    def clear(self) -> None:
        """``*CLS``: event register and queue cleared, enable masks kept."""
        with self._lock:
            self._queue.clear()
            self.esr = 0

    def power_on(self) -> None:
        with self._lock:
            self._queue.clear()
            self.esr, self.ese, self.sre = ESR_PON, 0, 0

    def read_esr(self) -> int:
        """``*ESR?``: read and clear."""
        with self._lock:
            value, self.esr = self.esr, 0
            return value

    def stb(self) -> int:
        """``*STB?``: non-destructive summary; bit 6 reads MSS."""
        with self._lock:
            value = STB_EAV if self._queue else 0
            if self.esr & self.ese:
                value |= STB_ESB
            if value & self.sre & ~STB_MSS:
                value |= STB_MSS
            return value


def format_entry(entry: tuple[int, str]) -> str:
    """``<code>,"<text>"`` with embedded quotes doubled (IEEE 488.2 string data)."""
    code, text = entry
    return f'{code},"{text.replace(chr(34), chr(34) * 2)}"'
