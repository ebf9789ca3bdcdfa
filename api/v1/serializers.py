"""Input and output shapes; the engine checks what they mean for the network."""

from __future__ import annotations

from typing import Any

from django.contrib.auth import get_user_model
from drf_spectacular.utils import extend_schema_field
from rest_framework import serializers

from scheduling.engine.calendars import WEEKDAYS
from scheduling.engine.network import MAX_DURATION, MAX_LAG
from scheduling.models import (
    PROGRESS_FIELDS,
    Activity,
    Calendar,
    Crew,
    DelayReason,
    LagUnit,
    Membership,
    OutOfSequence,
    ProgressEntry,
    Project,
    Relation,
    RelationType,
    Role,
    Run,
    RunGoal,
    RunKind,
    ScheduleVersion,
)

KEY = {"max_length": 64, "trim_whitespace": True}


def _iso(value: Any) -> Any:
    return value.isoformat() if hasattr(value, "isoformat") else value


def as_entry(data: dict[str, Any]) -> dict[str, Any]:
    """Validated input as a network-document entry (dates ISO, numbers plain)."""
    out = {}
    for k, v in data.items():
        if isinstance(v, list):
            v = [
                _iso(x)
                if not isinstance(x, dict)
                else {a: _iso(b) for a, b in x.items()}
                for x in v
            ]
        elif hasattr(v, "as_tuple"):  # Decimal
            v = float(v)
        out[k] = _iso(v)
    return out


class ProjectIn(serializers.Serializer):
    name = serializers.CharField(max_length=200)
    start = serializers.DateField()
    data_date = serializers.DateField(required=False, allow_null=True)
    deadline = serializers.DateField(required=False, allow_null=True)
    time_zone = serializers.CharField(max_length=64, required=False)
    nightly_hour = serializers.IntegerField(min_value=0, max_value=23, required=False)
    out_of_sequence = serializers.ChoiceField(
        choices=OutOfSequence.choices,
        required=False,
        help_text="how work started before its predecessors allow is scheduled: "
        "retained_logic (its rest still waits) or progress_override",
    )

    def validate_time_zone(self, value: str) -> str:
        import zoneinfo

        try:
            zoneinfo.ZoneInfo(value)
        except (zoneinfo.ZoneInfoNotFoundError, ValueError):
            raise serializers.ValidationError(f"unknown time zone {value!r}") from None
        return value


class ProjectOut(serializers.ModelSerializer):
    calendar = serializers.SlugRelatedField(
        slug_field="key", read_only=True, allow_null=True
    )
    role = serializers.SerializerMethodField()

    class Meta:
        model = Project
        fields = [
            "id",
            "name",
            "start",
            "calendar",
            "data_date",
            "deadline",
            "time_zone",
            "nightly_hour",
            "out_of_sequence",
            "revision",
            "progress_revision",
            "role",
            "created_at",
            "updated_at",
        ]

    def get_role(self, project: Project) -> str | None:
        roles = self.context.get("roles", {})
        return roles.get(project.pk)


class CalendarIn(serializers.Serializer):
    key = serializers.CharField(**KEY)
    name = serializers.CharField(max_length=200, required=False, allow_blank=True)
    workdays = serializers.ListField(
        child=serializers.ChoiceField(choices=WEEKDAYS), max_length=7
    )
    holidays = serializers.ListField(
        child=serializers.DateField(), required=False, max_length=5000
    )
    extra_workdays = serializers.ListField(
        child=serializers.DateField(), required=False, max_length=5000
    )


class CalendarOut(serializers.ModelSerializer):
    class Meta:
        model = Calendar
        fields = [
            "id",
            "key",
            "name",
            "workdays",
            "holidays",
            "extra_workdays",
            "version",
        ]


class CrewIn(serializers.Serializer):
    key = serializers.CharField(**KEY)
    name = serializers.CharField(max_length=200, required=False, allow_blank=True)
    capacity = serializers.IntegerField(min_value=1, max_value=10_000)
    calendar = serializers.CharField(required=False, allow_null=True, **KEY)
    # Periods {"from": date, "to": date}; the engine checks their dates.
    unavailable = serializers.ListField(
        child=serializers.DictField(), required=False, max_length=500
    )


class CrewOut(serializers.ModelSerializer):
    calendar = serializers.SlugRelatedField(
        slug_field="key", read_only=True, allow_null=True
    )

    class Meta:
        model = Crew
        fields = ["id", "key", "name", "capacity", "calendar", "unavailable", "version"]


class ActivityIn(serializers.Serializer):
    key = serializers.CharField(**KEY)
    name = serializers.CharField(max_length=200, required=False, allow_blank=True)
    duration = serializers.IntegerField(min_value=0, max_value=MAX_DURATION)
    calendar = serializers.CharField(required=False, allow_null=True, **KEY)
    demands = serializers.DictField(
        child=serializers.IntegerField(min_value=1, max_value=10_000), required=False
    )
    not_before = serializers.DateField(required=False, allow_null=True)
    deadline = serializers.DateField(required=False, allow_null=True)
    zone = serializers.CharField(max_length=100, required=False, allow_blank=True)
    trade = serializers.CharField(max_length=100, required=False, allow_blank=True)
    planned_value = serializers.DecimalField(
        max_digits=14, decimal_places=2, required=False, allow_null=True
    )
    quantity = serializers.DecimalField(
        max_digits=14, decimal_places=3, required=False, allow_null=True
    )
    unit = serializers.CharField(max_length=32, required=False, allow_blank=True)


class ProgressStateOut(serializers.Serializer):
    """An activity's progress as its entries fold to (read-only)."""

    status = serializers.ChoiceField(choices=["not_started", "started", "finished"])
    actual_start = serializers.DateField(allow_null=True)
    actual_finish = serializers.DateField(allow_null=True)
    percent_complete = serializers.IntegerField(allow_null=True)
    remaining = serializers.IntegerField(
        allow_null=True, help_text="working days still to do from the data date"
    )
    crew_count = serializers.IntegerField(allow_null=True)
    actual_cost = serializers.FloatField(
        allow_null=True, help_text="the cost of the work so far (cumulative)"
    )
    note = serializers.CharField(allow_blank=True)
    delay_reason = serializers.CharField(allow_blank=True)
    delay_note = serializers.CharField(allow_blank=True)
    version = serializers.IntegerField(
        help_text="the activity's progress version (its number of entries); send "
        "it back as activity_version"
    )
    last_entry = serializers.IntegerField(allow_null=True)
    last_recorded_at = serializers.DateTimeField(allow_null=True)


def _state_of(states: dict[int, Any] | None, activity_id: int) -> dict[str, Any]:
    from scheduling.progress_entries import EMPTY

    state = (states or {}).get(activity_id, EMPTY)
    return state.as_dict()


class ActivityOut(serializers.ModelSerializer):
    calendar = serializers.SlugRelatedField(
        slug_field="key", read_only=True, allow_null=True
    )
    progress = serializers.SerializerMethodField()

    @extend_schema_field(ProgressStateOut)
    def get_progress(self, activity: Activity) -> dict[str, Any]:
        return _state_of(self.context.get("progress"), activity.pk)

    class Meta:
        model = Activity
        fields = [
            "id",
            "key",
            "name",
            "duration",
            "calendar",
            "demands",
            "not_before",
            "deadline",
            "zone",
            "trade",
            "planned_value",
            "quantity",
            "unit",
            "version",
            "progress",
        ]


class RelationIn(serializers.Serializer):
    pred = serializers.CharField(**KEY)
    succ = serializers.CharField(**KEY)
    type = serializers.ChoiceField(choices=RelationType.values, default="FS")
    lag = serializers.IntegerField(min_value=-MAX_LAG, max_value=MAX_LAG, default=0)
    lag_unit = serializers.ChoiceField(choices=LagUnit.values, default="workdays")


class RelationOut(serializers.ModelSerializer):
    pred = serializers.SlugRelatedField(slug_field="key", read_only=True)
    succ = serializers.SlugRelatedField(slug_field="key", read_only=True)

    class Meta:
        model = Relation
        fields = ["id", "pred", "succ", "type", "lag", "lag_unit", "version"]


class MemberIn(serializers.Serializer):
    username = serializers.CharField(max_length=150)
    role = serializers.ChoiceField(choices=Role.values)


class MemberOut(serializers.ModelSerializer):
    username = serializers.SlugRelatedField(
        source="user", slug_field="username", queryset=get_user_model().objects.all()
    )

    class Meta:
        model = Membership
        fields = ["id", "username", "role"]


class TokenIn(serializers.Serializer):
    username = serializers.CharField(max_length=150)
    password = serializers.CharField(max_length=256, trim_whitespace=False)


class TokenOut(serializers.Serializer):
    token = serializers.CharField()


class RunIn(serializers.Serializer):
    kind = serializers.ChoiceField(choices=RunKind.choices)
    goal = serializers.ChoiceField(
        choices=RunGoal.choices, required=False, allow_null=True
    )
    time_limit = serializers.FloatField(required=False, min_value=0.01)
    stable = serializers.BooleanField(
        required=False,
        default=False,
        help_text="levelling: move as few activities as possible from the last "
        "published schedule",
    )


class RunProgressOut(serializers.Serializer):
    best_finish = serializers.DateField(allow_null=True)
    bound = serializers.DateField(allow_null=True)
    gap_percent = serializers.FloatField(allow_null=True)
    elapsed = serializers.FloatField(allow_null=True, help_text="seconds")
    at = serializers.DateTimeField(source="progress_at", allow_null=True)


class RunOut(serializers.ModelSerializer):
    requested_by = serializers.SlugRelatedField(
        slug_field="username", read_only=True, allow_null=True
    )
    progress = RunProgressOut(source="*", read_only=True)
    version = serializers.SerializerMethodField()

    class Meta:
        model = Run
        fields = [
            "id",
            "project",
            "kind",
            "goal",
            "stable",
            "time_limit",
            "origin",
            "nightly_for",
            "requested_by",
            "requested_at",
            "state",
            "attempts",
            "started_at",
            "finished_at",
            "revision",
            "progress",
            "version",
            "error",
            "problems",
        ]

    def get_version(self, run: Run) -> int | None:
        """The number of the schedule version this run published."""
        if hasattr(run, "version_number"):
            return run.version_number
        version = getattr(run, "version", None)
        return version.number if version is not None else None


class VersionOut(serializers.ModelSerializer):
    class Meta:
        model = ScheduleVersion
        fields = [
            "number",
            "run",
            "kind",
            "goal",
            "revision",
            "data_date",
            "finish",
            "published_at",
            "crew_peaks",
            "changes",
        ]


class VersionDetailOut(VersionOut):
    class Meta(VersionOut.Meta):
        fields = [*VersionOut.Meta.fields, "progress", "document"]


class ProgressIn(serializers.Serializer):
    """One entry from site. Ranges and dates are checked by the service, with
    messages that name the field and the activity."""

    activity = serializers.CharField(help_text="the activity's key", **KEY)
    actual_start = serializers.DateField(required=False, allow_null=True)
    actual_finish = serializers.DateField(required=False, allow_null=True)
    percent_complete = serializers.IntegerField(
        required=False, allow_null=True, min_value=-(2**31), max_value=2**31 - 1
    )
    remaining = serializers.IntegerField(
        required=False,
        allow_null=True,
        min_value=-(2**31),
        max_value=2**31 - 1,
        help_text="working days still to do from the data date",
    )
    crew_count = serializers.IntegerField(
        required=False, allow_null=True, min_value=-(2**31), max_value=2**31 - 1
    )
    actual_cost = serializers.DecimalField(
        max_digits=14,
        decimal_places=2,
        required=False,
        allow_null=True,
        coerce_to_string=False,
        help_text="the cost of the activity's work so far, cumulative, in the "
        "money of the planned values (the latest entry that gives one wins)",
    )
    note = serializers.CharField(
        required=False, allow_blank=True, max_length=2000, trim_whitespace=True
    )
    delay_reason = serializers.ChoiceField(
        choices=DelayReason.choices, required=False, allow_blank=True
    )
    delay_note = serializers.CharField(
        required=False, allow_blank=True, max_length=500, trim_whitespace=True
    )
    device_time = serializers.DateTimeField(
        required=False, allow_null=True, help_text="the device's clock at entry"
    )
    activity_version = serializers.IntegerField(
        required=False,
        allow_null=True,
        min_value=0,
        max_value=2**31 - 1,
        help_text="the activity's progress version the device had seen",
    )
    corrects = serializers.IntegerField(
        required=False,
        allow_null=True,
        min_value=1,
        max_value=2**63 - 1,
        help_text="makes this entry a correction of that entry of the activity",
    )
    cleared = serializers.ListField(
        child=serializers.ChoiceField(choices=list(PROGRESS_FIELDS)),
        required=False,
        max_length=len(PROGRESS_FIELDS),
        help_text="a correction's progress fields to empty",
    )


class ProgressEntryOut(serializers.ModelSerializer):
    activity = serializers.CharField(source="activity_key")
    kind = serializers.CharField(help_text="record, or correction (see corrects)")
    recorded_by = serializers.SlugRelatedField(slug_field="username", read_only=True)
    actual_cost = serializers.FloatField(read_only=True, allow_null=True)
    state = serializers.SerializerMethodField()

    class Meta:
        model = ProgressEntry
        fields = [
            "id",
            "activity",
            "kind",
            "corrects",
            "actual_start",
            "actual_finish",
            "percent_complete",
            "remaining",
            "cleared",
            "crew_count",
            "actual_cost",
            "note",
            "delay_reason",
            "delay_note",
            "recorded_by",
            "device_time",
            "recorded_at",
            "activity_version",
            "idempotency_key",
            "state",
        ]

    @extend_schema_field(ProgressStateOut)
    def get_state(self, entry: ProgressEntry) -> dict[str, Any]:
        """The activity's progress just after this entry."""
        if "state" in self.context:
            return self.context["state"].as_dict()
        return (entry.answer or {}).get("state") or {}


class CurrentProgressOut(ProgressStateOut):
    activity = serializers.CharField(help_text="the activity's key")


class ProgressConflictOut(serializers.Serializer):
    """409: the error envelope, and the activity's current progress."""

    error = serializers.DictField()
    current = CurrentProgressOut()


def page_of(item: type[serializers.Serializer]) -> type[serializers.Serializer]:
    """The schema of one page of ``item``s (what the list endpoints answer)."""
    return type(
        f"{item.__name__.removesuffix('Out')}Page",
        (serializers.Serializer,),
        {
            "count": serializers.IntegerField(),
            "next": serializers.URLField(allow_null=True),
            "previous": serializers.URLField(allow_null=True),
            "results": item(many=True),
        },
    )
