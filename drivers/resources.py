"""The VISA resource strings sweepd accepts: one set of rules for plans, ``--resource``,
``probe`` and ``dialect check``.

Supported buses, all through pyvisa with the pyvisa-py backend:

=========  =================================================  ==========================
kind       form                                               notes
=========  =================================================  ==========================
socket     ``TCPIP[n]::host::port::SOCKET``                   raw SCPI socket
hislip     ``TCPIP[n]::host::hislip<k>[,port]::INSTR``        IVI-6.1, default port 4880
vxi11      ``TCPIP[n]::host[,port]::[inst<k>::]INSTR``        VXI-11 (ONC RPC)
serial     ``ASRL<device>::INSTR``                            pyserial
usb        ``USB[n]::<vid>::<pid>::<serial>[::<intf>]::INSTR``  USB-TMC; needs pyusb, untested
=========  =================================================  ==========================

Anything else (GPIB, a ``;`` that could smuggle a second command into a string, spaces,
an unknown bus) is refused with one line before any third-party code sees the string.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from drivers.errors import ConnectError

MAX_LENGTH = 256
_HOST = r"(?P<host>[A-Za-z0-9.\-]+|\[[0-9A-Fa-f:.]+\])"
_PATTERNS: tuple[tuple[str, re.Pattern[str]], ...] = tuple(
    (kind, re.compile(pattern, re.IGNORECASE))
    for kind, pattern in (
        ("socket", rf"^TCPIP\d*::{_HOST}::(?P<port>\d{{1,5}})::SOCKET$"),
        ("hislip", rf"^TCPIP\d*::{_HOST}::(?P<device>hislip\d+)(,(?P<port>\d{{1,5}}))?::INSTR$"),
        ("vxi11", rf"^TCPIP\d*::{_HOST}(,(?P<port>\d{{1,5}}))?(::(?P<device>inst\d+))?::INSTR$"),
        ("serial", r"^ASRL(?P<device>[^\s:;,'\"]+)::INSTR$"),
        ("usb", r"^USB\d*::(?P<vid>0x[0-9A-F]{1,4}|\d{1,5})::(?P<pid>0x[0-9A-F]{1,4}|\d{1,5})"
                r"::(?P<device>[A-Za-z0-9_.\-]+)(::\d+)?::INSTR$"),
    )
)
FORMS = (
    "TCPIP::<host>::<port>::SOCKET, TCPIP::<host>::hislip0[,<port>]::INSTR, "
    "TCPIP::<host>[,<port>]::INSTR (VXI-11), ASRL<device>::INSTR or "
    "USB::<vid>::<pid>::<serial>::INSTR"
)
DEFAULT_PORTS = {"hislip": 4880}


@dataclass(frozen=True)
class ResourceInfo:
    """What a resource string names: the bus kind and, for LAN kinds, host and port."""

    resource: str
    kind: str
    host: str | None = None
    port: int | None = None

    @property
    def is_lan(self) -> bool:
        return self.kind in ("socket", "hislip", "vxi11")


def resource_problem(resource: object) -> str | None:
    """Why ``resource`` is refused (a short clause), or None when it is acceptable."""
    if not isinstance(resource, str) or not resource.strip():
        return "must be a non-empty string"
    if len(resource) > MAX_LENGTH:
        return f"longer than {MAX_LENGTH} characters"
    if ";" in resource:
        return "must not contain ';'"
    if any(ch.isspace() or not ch.isprintable() for ch in resource):
        return "must not contain spaces or control characters"
    if resource.upper().startswith("GPIB"):
        return f"GPIB is not supported; use {FORMS}"
    info = _match(resource)
    if info is None:
        return f"use {FORMS}"
    if info.port is not None and not 1 <= info.port <= 65535:
        return f"port {info.port} is outside 1..65535"
    return None


def parse_resource(resource: str, where: str = "") -> ResourceInfo:
    """The checked resource; ``ConnectError`` with one line naming it otherwise.

    ``where`` prefixes the message (a file and key path, or ``--resource``).
    """
    problem = resource_problem(resource)
    if problem is not None:
        prefix = f"{where}: " if where else ""
        raise ConnectError(
            f"{prefix}not a supported VISA resource string: {_shown(resource)} ({problem})"
        )
    info = _match(resource)
    assert info is not None
    return info


def _match(resource: str) -> ResourceInfo | None:
    for kind, pattern in _PATTERNS:
        found = pattern.match(resource)
        if found is None:
            continue
        groups = found.groupdict()
        host = groups.get("host")
        port_text = groups.get("port")
        port = int(port_text) if port_text else DEFAULT_PORTS.get(kind)
        if host and host.startswith("["):
            host = host[1:-1]
        return ResourceInfo(resource, kind, host, port)
    return None


def _shown(resource: object) -> str:
    text = repr(resource) if not isinstance(resource, str) else repr(resource[:80])
    return text


__all__ = ["FORMS", "ResourceInfo", "parse_resource", "resource_problem"]


def resource_key(resource: str) -> str:
    """Resources that name the same instrument compare equal (case, spacing)."""
    return "".join(resource.split()).upper()
