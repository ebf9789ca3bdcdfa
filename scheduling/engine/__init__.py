"""Sitepace's scheduling engine: pure Python and NumPy, no Django, no I/O.

Read a network document with :func:`parse_network` (or build one from columns
with :func:`build_network`), compute the critical path with
:func:`critical_path`, and render it with :func:`schedule_document`.
"""

from .calendars import CalendarTables, WorkCalendar
from .cautions import SITE_CAUTION
from .cpm import CpmResult, Driver, PathStep, critical_path
from .document import parse_network
from .network import FF, FS, SF, SS, Crew, Network, build_network
from .output import CrewPeak, crew_daily_demand, crew_peaks, schedule_document
from .problems import NetworkInvalid, Problem

__all__ = [
    "FF",
    "FS",
    "SF",
    "SS",
    "SITE_CAUTION",
    "CalendarTables",
    "CpmResult",
    "Crew",
    "CrewPeak",
    "Driver",
    "Network",
    "NetworkInvalid",
    "PathStep",
    "Problem",
    "WorkCalendar",
    "build_network",
    "critical_path",
    "crew_daily_demand",
    "crew_peaks",
    "parse_network",
    "schedule_document",
]
