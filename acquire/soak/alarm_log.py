"""The alarms of one soak run as recorded: journal rows, their count, the last one, and
the active set kept in the job's state file (so a restart does not raise them again)."""

from __future__ import annotations

from typing import Any

from acquire.journal import JournalStore
from acquire.soak.alarms import Alarm, AlarmBook
from acquire.soak.spool import Job
from acquire.utc import utc_text


class AlarmLog:
    """Journals raised alarms and keeps the job state's active list in step with the book."""

    def __init__(self, book: AlarmBook, journal: JournalStore, run_id: int, job: Job,
                 persisted: list[str], count: int) -> None:
        self.book = book
        self.journal = journal
        self.run_id = run_id
        self.job = job
        self.persisted = persisted
        self.count = count
        self.last: dict[str, Any] | None = None

    def journal_raised(self, k: int, raised: list[Alarm]) -> None:
        """One journal row per alarm raised at sweep ``k``."""
        for alarm in raised:
            self.journal.record_alarm(self.run_id, alarm.metric, alarm.message, seq=k,
                                      value=alarm.value, threshold=alarm.threshold)
            self.count += 1
            self.last = {"seq": k, "utc": utc_text(), "metric": alarm.metric,
                         "value": alarm.value, "threshold": alarm.threshold,
                         "message": alarm.message}

    def persist(self) -> None:
        """Keep the active alarms in the job state, so a restart does not raise them again."""
        active = sorted(self.book.active)
        if active != self.persisted:
            self.job.write_state(alarms_active=active)
            self.persisted = active
