"""Text from users (titles, file names, mask, segment and zone names) drawn as typed.

The plotting library reads a string holding an even number of ``$`` as math markup and
raises on markup it cannot parse (``$\\frac{1}{$``). ``plain_text`` escapes every ``$``
so the string is never read as markup and each ``$`` is drawn as itself; pictures pass
all user text through it (and keep TeX off).
"""

from __future__ import annotations


def plain_text(text: object) -> str:
    """``text`` escaped so a picture draws it literally (no math markup)."""
    return str(text).replace("$", r"\$")
