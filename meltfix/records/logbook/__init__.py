"""The heat logbook: heats, samples, burns, plans and actual additions, in SQLite or PostgreSQL.

``records`` holds what the logbook hands out, ``schema`` its tables and migrations, ``store`` the
:class:`Logbook` itself, ``backend`` with ``sqlite_backend`` and ``postgres_backend`` the engines,
``location`` where a logbook lives, and ``copy`` moves a shop's history between logbooks.
"""

from meltfix.records.logbook.location import ENV_VAR, LogbookLocation, ServerURL, default_logbook_path, logbook_location
from meltfix.records.logbook.records import (SHIFT_STARTS, AdditionsRecord, CostLine, HeatEvent, HeatHistory,
                                             HeatSummary, LineRecord, PlanRecord, SampleRecord, Shift, event_time)
from meltfix.records.logbook.schema import APPLICATION_ID, SCHEMA_VERSION
from meltfix.records.logbook.sqlite_backend import BUSY_TIMEOUT_S
from meltfix.records.logbook.store import Logbook, SampleTaken

__all__ = [
    "APPLICATION_ID", "BUSY_TIMEOUT_S", "ENV_VAR", "SCHEMA_VERSION", "SHIFT_STARTS", "AdditionsRecord", "CostLine",
    "HeatEvent", "HeatHistory", "HeatSummary", "LineRecord", "Logbook", "LogbookLocation", "PlanRecord",
    "SampleRecord", "SampleTaken", "ServerURL", "Shift", "default_logbook_path", "event_time", "logbook_location",
]
