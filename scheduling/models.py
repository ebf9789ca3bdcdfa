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
    created_at = models.DateTimeField(auto_now_add=True)
    updated_at = models.DateTimeField(auto_now=True)

    class Meta:
        ordering = ["id"]
        constraints = [
            models.CheckConstraint(
                condition=Q(nightly_hour__lte=23), name="project_nightly_hour_0_23"
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
