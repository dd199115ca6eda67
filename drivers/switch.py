"""The automatic standard switch: connect open, short, load, thru or the device by command."""

from __future__ import annotations

from drivers.blocks import quote
from drivers.conversation import Conversation
from drivers.dialect_model import STANDARDS
from drivers.error_queue import ErrorQueue
from drivers.errors import DialectError, SettingMismatch
from drivers.replies import parse_flag, same_token


def select_standard(talk: Conversation, errors: ErrorQueue, name: str) -> None:
    """Switch to standard ``name``, check the switch's read-back and the error queue."""
    dialect = talk.dialect
    switch = dialect.switch
    if switch is None:
        raise DialectError(
            f"{dialect.source}: has no standard switch (no 'switch' section); "
            f"connect the {name} by hand"
        )
    if name not in STANDARDS:
        raise DialectError(f"not a standard: {name!r}; known: {', '.join(STANDARDS)}")
    token = switch.tokens.get(name)
    if token is None:
        raise DialectError(
            f"{dialect.source}: switch.standards has no token for {name} "
            f"(has {', '.join(switch.tokens)})"
        )
    command = switch.set.render(standard=token)
    talk.send_setting(command)
    if switch.query is not None:
        query = switch.query.render(standard=token)
        reply = talk.query(query)
        ok = (
            parse_flag(reply, talk.where(query))
            if switch.reply == "flag"
            else same_token(reply, token)
        )
        if not ok:
            raise SettingMismatch(
                f"instrument {talk.resource}: standard {name}: sent '{command}', "
                f"'{query}' replied {quote(reply.encode())}"
            )
    errors.check(f"after selecting the {name} standard")
