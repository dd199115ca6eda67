"""The simulator's own error root (it may not import ``drivers``; see the package docstring).

Every message is one line naming the file, key or option at fault and what is allowed.
"""

from __future__ import annotations


class SimError(Exception):
    """A simulator configuration problem: bad option, device parameter, kit file or fault."""
