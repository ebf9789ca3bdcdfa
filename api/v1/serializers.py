"""Input and output shapes; the engine checks what they mean for the network."""

from __future__ import annotations

from typing import Any

from django.contrib.auth import get_user_model
from rest_framework import serializers

from scheduling.engine.calendars import WEEKDAYS
from scheduling.engine.network import MAX_DURATION, MAX_LAG
from scheduling.models import (
    Activity,
    Calendar,
    Crew,
    LagUnit,
    Membership,
    Project,
    Relation,
    RelationType,
    Role,
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
            "revision",
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


class ActivityOut(serializers.ModelSerializer):
    calendar = serializers.SlugRelatedField(
        slug_field="key", read_only=True, allow_null=True
    )

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
