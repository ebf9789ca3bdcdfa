"""Reading PSPLIB single-mode instances (``.sm``) and their solution lists.

PSPLIB (Kolisch & Sprecher, "PSPLIB – a project scheduling problem library",
EJOR 96(1), 1996/97) is the standard benchmark of the resource-constrained
project scheduling problem: jobs with durations, finish-to-start precedences
without lag and four renewable resources of constant capacity. The format is
described in ``shared/datasets/SOURCES.md``.

An instance becomes a :class:`~.network.Network` on one seven-day calendar, so
that positions are plain days and the makespan of a schedule is its finish day
index: the dummy sink job is a milestone at the instant the last job ends, and
a milestone's date is the day that begins at that instant. Jobs are keyed
``J1 .. Jn`` by their PSPLIB number; the four resources become crews
``R1 .. R4``.

Parsing works on text (:func:`parse_sm`, :func:`parse_solutions`); the thin
file helpers beside them locate and read the data set, which is never copied
into the repository.
"""

from __future__ import annotations

import datetime as dt
import os
import pathlib
import re
from dataclasses import dataclass

from .calendars import WEEKDAYS, WorkCalendar
from .network import FS, Crew, Network, build_network

#: Day 0 of every PSPLIB network. Any date would do on a seven-day calendar.
PSPLIB_START = dt.date(2027, 1, 4)
#: Environment variable naming the folder that holds ``psplib/``.
DATASETS_ENV = "SITEPACE_DATASETS"


@dataclass(frozen=True, slots=True)
class PsplibInstance:
    """One ``.sm`` instance: the network and the header figures.

    ``mpm_time`` is the critical-path length printed in the file (days);
    ``horizon`` the file's trivial upper bound (sum of durations).
    """

    name: str
    network: Network
    capacities: tuple[int, ...]
    mpm_time: int
    horizon: int


def makespan(network: Network, finish: dt.date) -> int:
    """PSPLIB makespan of a schedule of a PSPLIB network: its finish day index."""
    return (finish - network.start).days


def parse_sm(text: str, name: str = "instance") -> PsplibInstance:
    """Parse the text of a single-mode ``.sm`` file into a :class:`PsplibInstance`.

    Raises :class:`ValueError` naming the section when the text is not a
    complete single-mode instance.
    """
    lines = text.splitlines()

    def header_int(label: str) -> int:
        for line in lines:
            if line.strip().startswith(label):
                return int(line.split(":")[1].split()[0])
        raise ValueError(f"{name}: no {label!r} line")

    jobs = header_int("jobs (incl. supersource/sink )")
    horizon = header_int("horizon")

    def section(title: str) -> list[list[int]]:
        """The integer rows after ``title`` up to the next rule line."""
        for at, line in enumerate(lines):  # noqa: B007 (used after the loop)
            if line.strip().startswith(title):
                break
        else:
            raise ValueError(f"{name}: no {title!r} section")
        rows = []
        for line in lines[at + 1 :]:
            if line.startswith(("*", "=")):
                break
            if line.startswith("-") or not re.match(r"\s*\d", line):
                continue
            rows.append([int(x) for x in line.split()])
        return rows

    info = section("PROJECT INFORMATION")
    mpm_time = info[0][5]
    prec = section("PRECEDENCE RELATIONS")
    req = section("REQUESTS/DURATIONS")
    caps = section("RESOURCEAVAILABILITIES")
    if len(prec) != jobs or len(req) != jobs or not caps:
        raise ValueError(
            f"{name}: expected {jobs} jobs in both job sections and the capacities"
        )
    capacities = tuple(caps[0])
    pred, succ = [], []
    for row in prec:
        job, _modes, count = row[0], row[1], row[2]
        for s in row[3 : 3 + count]:
            pred.append(job - 1)
            succ.append(s - 1)
    duration = [row[2] for row in req]
    dem_a, dem_c, dem_u = [], [], []
    for row in req:
        for r, units in enumerate(row[3 : 3 + len(capacities)]):
            if units:
                dem_a.append(row[0] - 1)
                dem_c.append(r)
                dem_u.append(units)
    calendar = WorkCalendar.from_names("all days", WEEKDAYS)
    crews = [
        Crew(f"R{r + 1}", f"Resource {r + 1}", cap, 0)
        for r, cap in enumerate(capacities)
    ]
    network = build_network(
        name=name,
        start=PSPLIB_START,
        calendars=[calendar],
        keys=[f"J{j + 1}" for j in range(jobs)],
        duration=duration,
        rel_pred=pred,
        rel_succ=succ,
        rel_type=[FS] * len(pred),
        rel_lag=[0] * len(pred),
        crews=crews,
        dem_activity=dem_a,
        dem_crew=dem_c,
        dem_units=dem_u,
    )
    return PsplibInstance(name, network, capacities, mpm_time, horizon)


def parse_solutions(text: str) -> dict[tuple[int, int], int]:
    """Makespans of a solution list (``j30opt.sm`` or ``jNNhrs.sm``).

    Maps ``(parameter group, instance)`` to the makespan: the proven optimum
    in ``j30opt.sm``, the best known upper bound in the ``hrs`` files. Rows are
    recognised as lines that begin with three integers.
    """
    out: dict[tuple[int, int], int] = {}
    for line in text.splitlines():
        parts = line.split()
        if len(parts) >= 3 and all(p.isdigit() for p in parts[:3]):
            out[(int(parts[0]), int(parts[1]))] = int(parts[2])
    return out


def datasets_dir() -> pathlib.Path:
    """The ``psplib`` folder: ``$SITEPACE_DATASETS/psplib`` or the shared copy.

    The shared copy sits beside the repository (``../shared/datasets``).
    """
    root = os.environ.get(DATASETS_ENV)
    base = (
        pathlib.Path(root)
        if root
        else pathlib.Path(__file__).resolve().parents[2].parent / "shared" / "datasets"
    )
    return base / "psplib"


def instance_path(size: int, group: int, number: int) -> pathlib.Path:
    """Path of ``j<size><group>_<number>.sm``, e.g. ``j3012_3.sm``."""
    return datasets_dir() / f"j{size}" / f"j{size}{group}_{number}.sm"


def load_instance(size: int, group: int, number: int) -> PsplibInstance:
    """Read and parse one instance of the data set (see :func:`instance_path`)."""
    path = instance_path(size, group, number)
    return parse_sm(path.read_text(), path.stem)


def load_solutions(filename: str) -> dict[tuple[int, int], int]:
    """Read a solution list of the data set, e.g. ``"j30opt.sm"``."""
    return parse_solutions((datasets_dir() / "solutions" / filename).read_text())
