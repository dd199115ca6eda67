"""The instrument's error queue: drained oldest first, reported in one bounded line."""

from __future__ import annotations

import logging

from drivers.conversation import Conversation
from drivers.errors import ScpiErrorQueue
from drivers.replies import format_entries, parse_error_entry

log = logging.getLogger(__name__)


class ErrorQueue:
    """Reads the dialect's error query until it answers the no-error code."""

    def __init__(self, talk: Conversation) -> None:
        self.talk = talk

    def drain(self) -> list[tuple[int, str]]:
        """Drain the error queue, oldest first (at most the dialect's ``max_entries`` reads)."""
        d = self.talk.dialect
        command = d.error_query.render()
        entries: list[tuple[int, str]] = []
        for _ in range(d.error_max_entries):
            code, text = parse_error_entry(self.talk.query(command), self.talk.where(command))
            if code == d.error_none_code:
                return entries
            entries.append((code, text))
        log.warning(
            "%s: error queue still not empty after %d reads", self.talk.resource, len(entries)
        )
        return entries

    def check(self, context: str) -> None:
        """Drain the error queue; entries raise ``ScpiErrorQueue`` naming ``context``."""
        entries = self.drain()
        if entries:
            raise ScpiErrorQueue(
                f"instrument {self.talk.resource}: error queue {context}: "
                f"{format_entries(entries)}",
                tuple(entries),
            )
