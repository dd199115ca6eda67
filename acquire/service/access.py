"""Who may call the service: loopback by default; other addresses need a token.

``--listen HOST:PORT`` binds loopback unless told otherwise. Any other address is refused
unless ``--token-file`` names a file that only its owner can read (mode 0600 or 0400,
owned by the user running sweepd); every request must then carry
``Authorization: Bearer <token>``. The page and API compare tokens in constant time.
"""

from __future__ import annotations

import hmac
import ipaddress
import os
import stat
from dataclasses import dataclass
from pathlib import Path

from drivers.errors import SweepdError


class AccessError(SweepdError):
    """The listen address or token file cannot be used safely."""


@dataclass(frozen=True)
class Listen:
    host: str
    port: int

    @property
    def loopback(self) -> bool:
        if self.host == "localhost":
            return True
        try:
            return ipaddress.ip_address(self.host).is_loopback
        except ValueError:
            return False


def parse_listen(text: str) -> Listen:
    """``HOST:PORT`` (``[v6]:PORT`` for IPv6); port 0 picks a free one."""
    host, sep, port = text.rpartition(":")
    host = host.strip("[]")
    if not sep or not host or not port.isdigit() or int(port) > 65535:
        raise AccessError(f"--listen {text!r}: give HOST:PORT, e.g. 127.0.0.1:8350")
    return Listen(host, int(port))


def read_token(path: Path) -> str:
    """The token in ``path``; refused unless only its owner (this user) can read it."""
    try:
        info = os.stat(path)
    except OSError as exc:
        raise AccessError(f"--token-file {path}: cannot read ({exc.strerror})") from None
    if info.st_uid != os.geteuid():
        raise AccessError(f"--token-file {path}: owned by uid {info.st_uid}, not by the user "
                          "running sweepd")
    if info.st_mode & (stat.S_IRWXG | stat.S_IRWXO):
        raise AccessError(f"--token-file {path}: readable by others (mode "
                          f"{stat.S_IMODE(info.st_mode):04o}); chmod 600 it")
    token = path.read_text(encoding="utf-8").strip()
    if len(token) < 16:
        raise AccessError(f"--token-file {path}: the token must be at least 16 characters")
    return token


def check_access(listen: Listen, token_file: Path | None) -> str | None:
    """The token required of callers (None: loopback without a token file)."""
    if token_file is not None:
        return read_token(token_file)
    if not listen.loopback:
        raise AccessError(f"--listen {listen.host}:{listen.port}: not a loopback address; "
                          "serving other machines needs --token-file FILE (mode 600)")
    return None


def token_matches(header: str | None, token: str) -> bool:
    if not header or not header.startswith("Bearer "):
        return False
    return hmac.compare_digest(header[len("Bearer "):].strip().encode(), token.encode())
