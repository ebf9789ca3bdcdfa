"""Stored projects: the network's rows, members and the cached schedule.

The network document (``sitepace.network/1``) is the one shape in which rows
meet the engine; ``scheduling/bridge.py`` converts both ways. Invariants that a
row can hold by itself are database constraints; everything that needs the
whole network (loops, unknown keys) is checked by the engine before a write.
"""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import F, Q

from scheduling.engine.network import MAX_DURATION, MAX_LAG


class Role(models.TextChoices):
    OWNER = "owner", "Owner"
    SITE_MANAGER = "site_manager", "Site manager"
    SCHEDULER = "scheduler", "Scheduler"


class RelationType(models.TextChoices):
    FS = "FS", "Finish to start"
    SS = "SS", "Start to start"
    FF = "FF", "Finish to finish"
    SF = "SF", "Start to finish"


class LagUnit(models.TextChoices):
    WORKDAYS = "workdays", "Working days"
    CALENDAR_DAYS = "calendar_days", "Calendar days"


class OutOfSequence(models.TextChoices):
    """How work started before its predecessors allow is scheduled."""

    RETAINED_LOGIC = "retained_logic", "Retained logic"
    PROGRESS_OVERRIDE = "progress_override", "Progress override"


class Project(models.Model):
    name = models.CharField(max_length=200)
    start = models.DateField()
    calendar = models.ForeignKey(
        "Calendar", null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    data_date = models.DateField(null=True, blank=True)
    deadline = models.DateField(null=True, blank=True)
    time_zone = models.CharField(max_length=64, default="UTC")
    nightly_hour = models.PositiveSmallIntegerField(default=2)
    #: Changes on every edit of the network (activities, relations, calendars,
    #: crews, the project's dates): the network's ETag and the schedule cache key.
    revision = models.PositiveIntegerField(default=1)
    #: How out-of-sequence work is scheduled (the network document's
    #: ``project.out_of_sequence``); part of the network, so it moves ``revision``.
    out_of_sequence = models.CharField(
        max_length=20,
        choices=OutOfSequence.choices,
        default=OutOfSequence.RETAINED_LOGIC,
    )
    #: Changes on every progress entry, never on a network edit: schedulers'
    #: ETags stay valid while the site records progress. The on-demand critical
    #: path is cached per (revision, progress_revision).
    progress_revision = models.PositiveIntegerField(default=0)
    created_at = models.DateTimeField(auto_now_add=True)
    updated_at = models.DateTimeField(auto_now=True)

    class Meta:
        ordering = ["id"]
        constraints = [
            models.CheckConstraint(
                condition=Q(nightly_hour__lte=23), name="project_nightly_hour_0_23"
            ),
            models.CheckConstraint(
                condition=Q(out_of_sequence__in=OutOfSequence.values),
                name="project_out_of_sequence_known",
            ),
            models.CheckConstraint(
                condition=Q(deadline__isnull=True) | Q(deadline__gte=F("start")),
                name="project_deadline_after_start",
            ),
        ]

    def __str__(self) -> str:
        return self.name


class Calendar(models.Model):
    project = models.ForeignKey(
        Project, on_delete=models.CASCADE, related_name="calendars"
    )
    key = models.CharField(max_length=64)
    name = models.CharField(max_length=200, blank=True)
    workdays = models.JSONField(default=list)
    holidays = models.JSONField(default=list, blank=True)
    extra_workdays = models.JSONField(default=list, blank=True)
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["key", "id"]
        constraints = [
            models.UniqueConstraint(
                fields=["project", "key"], name="calendar_key_unique"
            )
        ]

    def __str__(self) -> str:
        return self.key


class Crew(models.Model):
    project = models.ForeignKey(Project, on_delete=models.CASCADE, related_name="crews")
    key = models.CharField(max_length=64)
    name = models.CharField(max_length=200, blank=True)
    capacity = models.PositiveIntegerField(default=1)
    calendar = models.ForeignKey(
        Calendar, null=True, blank=True, on_delete=models.PROTECT, related_name="crews"
    )
    unavailable = models.JSONField(default=list, blank=True)
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["key", "id"]
        constraints = [
            models.UniqueConstraint(fields=["project", "key"], name="crew_key_unique"),
            models.CheckConstraint(
                condition=Q(capacity__gte=1), name="crew_capacity_1"
            ),
        ]

    def __str__(self) -> str:
        return self.key


class Activity(models.Model):
    project = models.ForeignKey(
        Project, on_delete=models.CASCADE, related_name="activities"
    )
    key = models.CharField(max_length=64)
    name = models.CharField(max_length=200, blank=True)
    duration = models.IntegerField()
    calendar = models.ForeignKey(
        Calendar,
        null=True,
        blank=True,
        on_delete=models.PROTECT,
        related_name="activities",
    )
    #: Crew key → units of that crew the activity needs while it works.
    demands = models.JSONField(default=dict, blank=True)
    not_before = models.DateField(null=True, blank=True)
    deadline = models.DateField(null=True, blank=True)
    planned_value = models.DecimalField(
        max_digits=14, decimal_places=2, null=True, blank=True
    )
    quantity = models.DecimalField(
        max_digits=14, decimal_places=3, null=True, blank=True
    )
    unit = models.CharField(max_length=32, blank=True)
    zone = models.CharField(max_length=100, blank=True)
    trade = models.CharField(max_length=100, blank=True)
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["key", "id"]
        constraints = [
            models.UniqueConstraint(
                fields=["project", "key"], name="activity_key_unique"
            ),
            models.CheckConstraint(
                condition=Q(duration__gte=0) & Q(duration__lte=MAX_DURATION),
                name="activity_duration_range",
            ),
        ]
        verbose_name_plural = "activities"

    def __str__(self) -> str:
        return self.key


class Relation(models.Model):
    project = models.ForeignKey(
        Project, on_delete=models.CASCADE, related_name="relations"
    )
    pred = models.ForeignKey(Activity, on_delete=models.CASCADE, related_name="+")
    succ = models.ForeignKey(Activity, on_delete=models.CASCADE, related_name="+")
    type = models.CharField(
        max_length=2, choices=RelationType.choices, default=RelationType.FS
    )
    lag = models.IntegerField(default=0)
    lag_unit = models.CharField(
        max_length=16, choices=LagUnit.choices, default=LagUnit.WORKDAYS
    )
    version = models.PositiveIntegerField(default=1)

    class Meta:
        ordering = ["id"]
        constraints = [
            models.UniqueConstraint(
                fields=["pred", "succ"], name="relation_pair_unique"
            ),
            models.CheckConstraint(
                condition=~Q(pred=F("succ")), name="relation_not_self"
            ),
            models.CheckConstraint(
                condition=Q(lag__gte=-MAX_LAG) & Q(lag__lte=MAX_LAG),
                name="relation_lag_range",
            ),
            models.CheckConstraint(
                condition=Q(type__in=RelationType.values), name="relation_type_known"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.pred_id}→{self.succ_id} {self.type}"


class Membership(models.Model):
    user = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.CASCADE, related_name="memberships"
    )
    project = models.ForeignKey(
        Project, on_delete=models.CASCADE, related_name="members"
    )
    role = models.CharField(max_length=16, choices=Role.choices)

    class Meta:
        ordering = ["id"]
        constraints = [
            models.UniqueConstraint(
                fields=["user", "project"], name="one_role_per_project"
            ),
            models.CheckConstraint(
                condition=Q(role__in=Role.values), name="role_known"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.user_id} as {self.role} on {self.project_id}"


class ComputedSchedule(models.Model):
    """The critical-path result of one network revision, computed on demand."""

    project = models.OneToOneField(
        Project, on_delete=models.CASCADE, related_name="computed_schedule"
    )
    revision = models.PositiveIntegerField()
    document = models.JSONField()
    computed_at = models.DateTimeField(auto_now=True)

    def __str__(self) -> str:
        return f"schedule of project {self.project_id} at revision {self.revision}"


class RunKind(models.TextChoices):
    CPM = "cpm", "Critical path"
    LEVEL = "level", "Crew levelling"


class RunGoal(models.TextChoices):
    SHORTEST = "shortest", "Shortest finish"
    SMOOTH = "smooth", "Smooth crews within the critical-path finish"


class RunState(models.TextChoices):
    """Where a run is; ``waiting`` and ``working`` are the active states."""

    WAITING = "waiting", "Waiting for a worker"
    WORKING = "working", "A worker is computing it"
    PUBLISHED = "published", "Finished; its schedule is a published version"
    FAILED = "failed", "Stopped with an error; nothing was published"
    CANCELLED = "cancelled", "Cancelled; nothing was published"


ACTIVE_STATES = (RunState.WAITING, RunState.WORKING)


class RunOrigin(models.TextChoices):
    REQUEST = "request", "Asked for through the API"
    NIGHTLY = "nightly", "The nightly re-levelling"
    COMMAND = "command", "The relevel command"


class Run(models.Model):
    """One request to compute a schedule, and what became of it.

    A worker claims a run by moving it from ``waiting`` to ``working`` with a
    fresh ``claim`` token, keeps ``heartbeat_at`` fresh while it works and
    writes the solver's progress; a claim whose heartbeat went stale (the
    worker died) may be taken over by a later delivery of the same run.
    """

    project = models.ForeignKey(Project, on_delete=models.CASCADE, related_name="runs")
    kind = models.CharField(max_length=8, choices=RunKind.choices)
    goal = models.CharField(max_length=16, choices=RunGoal.choices, blank=True)
    #: Levelling only: start from the last published schedule and move as few
    #: activities as possible.
    stable = models.BooleanField(default=False)
    #: Seconds the solver may take (levelling); the critical path ignores it.
    time_limit = models.FloatField(default=10.0)
    origin = models.CharField(
        max_length=8, choices=RunOrigin.choices, default=RunOrigin.REQUEST
    )
    #: The project's local date a nightly run is for (one per project and day).
    nightly_for = models.DateField(null=True, blank=True)
    requested_by = models.ForeignKey(
        settings.AUTH_USER_MODEL,
        null=True,
        blank=True,
        on_delete=models.SET_NULL,
        related_name="+",
    )
    requested_at = models.DateTimeField(auto_now_add=True)
    state = models.CharField(
        max_length=10, choices=RunState.choices, default=RunState.WAITING
    )
    claim = models.CharField(max_length=36, blank=True)
    task_id = models.CharField(max_length=64, blank=True)
    attempts = models.PositiveIntegerField(default=0)
    started_at = models.DateTimeField(null=True, blank=True)
    heartbeat_at = models.DateTimeField(null=True, blank=True)
    finished_at = models.DateTimeField(null=True, blank=True)
    #: The network revision the worker read (set when it starts).
    revision = models.PositiveIntegerField(null=True, blank=True)
    best_finish = models.DateField(null=True, blank=True)
    bound = models.DateField(null=True, blank=True)
    gap_percent = models.FloatField(null=True, blank=True)
    elapsed = models.FloatField(null=True, blank=True)
    progress_at = models.DateTimeField(null=True, blank=True)
    error = models.TextField(blank=True)
    problems = models.JSONField(default=list, blank=True)

    class Meta:
        ordering = ["-id"]
        constraints = [
            models.UniqueConstraint(
                fields=["project"],
                condition=Q(state__in=["waiting", "working"]),
                name="one_active_run_per_project",
            ),
            models.UniqueConstraint(
                fields=["project", "nightly_for"],
                condition=Q(origin="nightly"),
                name="one_nightly_run_per_project_day",
            ),
            models.CheckConstraint(
                condition=Q(state__in=RunState.values), name="run_state_known"
            ),
            models.CheckConstraint(
                condition=Q(kind__in=RunKind.values), name="run_kind_known"
            ),
            models.CheckConstraint(
                condition=Q(time_limit__gt=0), name="run_time_limit_positive"
            ),
        ]

    def __str__(self) -> str:
        return f"run {self.pk} ({self.kind}, {self.state}) of project {self.project_id}"


class ScheduleVersion(models.Model):
    """A published schedule, numbered per project; never changed once stored.

    ``document`` is the whole ``sitepace.schedule/1`` result, written in the
    same transaction that marks its run published, so a reader sees either the
    previous version or this one complete. ``changes`` compares it with the
    version before (finish, moved activities, crew peaks).
    """

    project = models.ForeignKey(
        Project, on_delete=models.CASCADE, related_name="versions"
    )
    number = models.PositiveIntegerField()
    run = models.OneToOneField(Run, on_delete=models.PROTECT, related_name="version")
    kind = models.CharField(max_length=8, choices=RunKind.choices)
    goal = models.CharField(max_length=16, choices=RunGoal.choices, blank=True)
    #: The network revision and the data date the schedule was computed from.
    revision = models.PositiveIntegerField()
    data_date = models.DateField(null=True, blank=True)
    #: Per activity, the progress fields of the network it was computed from
    #: (actual dates, remaining days, percent complete), where any was set.
    progress = models.JSONField(default=dict, blank=True)
    finish = models.DateField()
    document = models.JSONField()
    #: Each crew's peak daily demand in this schedule: crew → {peak, date, capacity}.
    crew_peaks = models.JSONField(default=dict, blank=True)
    changes = models.JSONField(default=dict, blank=True)
    published_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["project", "-number"]
        constraints = [
            models.UniqueConstraint(
                fields=["project", "number"], name="version_number_unique"
            ),
            models.CheckConstraint(
                condition=Q(number__gte=1), name="version_number_from_1"
            ),
        ]

    def __str__(self) -> str:
        return f"schedule version {self.number} of project {self.project_id}"


class DelayReason(models.TextChoices):
    """Why work on site is held up: a short list of our own, plus free text."""

    WEATHER = "weather", "Weather"
    MATERIAL = "material", "Waiting for material"
    OTHER_TRADE = "other_trade", "Waiting for another trade"
    CREW_SHORT = "crew_short", "Crew short"
    DESIGN_QUESTION = "design_question", "Design question"
    ACCESS = "access", "No access to the work area"
    INSPECTION = "inspection", "Waiting for an inspection"
    EQUIPMENT = "equipment", "Equipment"
    OTHER = "other", "Other (see the delay note)"


class EntryKind(models.TextChoices):
    RECORD = "record", "Record of what happened"
    CORRECTION = "correction", "Correction of an earlier entry"


#: The progress fields of the network document an entry may set.
PROGRESS_FIELDS = ("actual_start", "actual_finish", "percent_complete", "remaining")


class ProgressEntry(models.Model):
    """One record of what happened on site; never changed once stored.

    An activity's progress is the fold of its entries in server order (see
    ``scheduling/progress_entries.py``). A correction is a new entry that may
    change recorded dates, touch a finished activity and clear fields
    (``cleared``); the history itself is never rewritten.
    """

    project = models.ForeignKey(
        Project, on_delete=models.CASCADE, related_name="progress_entries"
    )
    #: Null once the activity is deleted from the network; ``activity_key``
    #: keeps the history readable.
    activity = models.ForeignKey(
        Activity,
        null=True,
        blank=True,
        on_delete=models.SET_NULL,
        related_name="progress_entries",
    )
    activity_key = models.CharField(max_length=64)
    kind = models.CharField(
        max_length=12, choices=EntryKind.choices, default=EntryKind.RECORD
    )
    corrects = models.ForeignKey(
        "self",
        null=True,
        blank=True,
        on_delete=models.PROTECT,
        related_name="corrections",
    )
    actual_start = models.DateField(null=True, blank=True)
    actual_finish = models.DateField(null=True, blank=True)
    percent_complete = models.PositiveSmallIntegerField(null=True, blank=True)
    #: Working days of the activity's calendar still to do, from the data date.
    remaining = models.PositiveIntegerField(null=True, blank=True)
    #: The cost of the activity's work so far (cumulative, in the money of the
    #: planned values); the latest entry that gives one wins.
    actual_cost = models.DecimalField(
        max_digits=14, decimal_places=2, null=True, blank=True
    )
    #: Progress fields a correction empties (names from ``PROGRESS_FIELDS``).
    cleared = models.JSONField(default=list, blank=True)
    crew_count = models.PositiveIntegerField(null=True, blank=True)
    note = models.TextField(blank=True)
    delay_reason = models.CharField(
        max_length=20, choices=DelayReason.choices, blank=True
    )
    delay_note = models.CharField(max_length=500, blank=True)
    recorded_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="+"
    )
    #: The device's clock when the entry was made (it may be hours before it
    #: reached the server); ``recorded_at`` is the server's.
    device_time = models.DateTimeField(null=True, blank=True)
    recorded_at = models.DateTimeField()
    #: The activity's progress version the device had seen (its count of
    #: entries then); older than the server's means the entry is checked for
    #: clashes with what arrived since.
    activity_version = models.PositiveIntegerField(null=True, blank=True)
    #: The client's Idempotency-Key, unique per project and user when given.
    idempotency_key = models.CharField(max_length=100, blank=True)
    #: SHA-256 of the request as validated, to tell a retry from a reuse.
    fingerprint = models.CharField(max_length=64, blank=True)
    #: The answer the first request got, replayed for a retry with the same key.
    answer = models.JSONField(default=dict, blank=True)

    class Meta:
        ordering = ["id"]
        verbose_name_plural = "progress entries"
        constraints = [
            models.UniqueConstraint(
                fields=["project", "recorded_by", "idempotency_key"],
                condition=~Q(idempotency_key=""),
                name="progress_idempotency_key_unique",
            ),
            models.CheckConstraint(
                condition=Q(percent_complete__isnull=True)
                | Q(percent_complete__lte=100),
                name="progress_percent_0_100",
            ),
            models.CheckConstraint(
                condition=Q(actual_finish__isnull=True)
                | Q(actual_start__isnull=True)
                | Q(actual_finish__gte=F("actual_start")),
                name="progress_finish_not_before_start",
            ),
            models.CheckConstraint(
                condition=Q(kind__in=EntryKind.values), name="progress_kind_known"
            ),
            models.CheckConstraint(
                condition=Q(actual_cost__isnull=True) | Q(actual_cost__gte=0),
                name="progress_actual_cost_not_negative",
            ),
        ]
        indexes = [
            models.Index(fields=["project", "activity", "id"], name="progress_fold"),
        ]

    def __str__(self) -> str:
        return f"progress entry {self.pk} on {self.activity_key}"


class Baseline(models.Model):
    """A published schedule kept as the yardstick; never changed once stored.

    ``activities`` holds, per activity key, the dates the schedule version
    planned (levelled dates when the version was levelled, else early dates),
    its duration, planned value and whether it is a milestone, so that later
    edits of the network leave the baseline as it was. Only ``current`` ever
    changes (``baseline_set_current``); at most one baseline per project is
    current, by a partial unique index.
    """

    project = models.ForeignKey(
        Project, on_delete=models.CASCADE, related_name="baselines"
    )
    name = models.CharField(max_length=100)
    version = models.ForeignKey(
        ScheduleVersion, on_delete=models.PROTECT, related_name="baselines"
    )
    captured_by = models.ForeignKey(
        settings.AUTH_USER_MODEL,
        null=True,
        blank=True,
        on_delete=models.SET_NULL,
        related_name="+",
    )
    captured_at = models.DateTimeField(auto_now_add=True)
    current = models.BooleanField(default=False)
    start = models.DateField()
    finish = models.DateField()
    data_date = models.DateField(null=True, blank=True)
    #: The project's calendar key when captured (working-day variances use it).
    calendar = models.CharField(max_length=64, blank=True)
    activities = models.JSONField(default=dict)

    class Meta:
        ordering = ["project", "-id"]
        constraints = [
            models.UniqueConstraint(
                fields=["project", "name"], name="baseline_name_unique"
            ),
            models.UniqueConstraint(
                fields=["project"],
                condition=Q(current=True),
                name="one_current_baseline_per_project",
            ),
            models.CheckConstraint(
                condition=Q(finish__gte=F("start")), name="baseline_finish_after_start"
            ),
        ]

    def __str__(self) -> str:
        return f"baseline {self.name!r} of project {self.project_id}"
