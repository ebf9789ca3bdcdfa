"""Shapes of baselines and of the owner's status report (for the schema).

The report itself is built as a plain dict by ``scheduling.report``; these
serializers document it in the OpenAPI schema, and a test checks that every
key of a built report is documented here.
"""

from __future__ import annotations

from rest_framework import serializers

from scheduling.models import Baseline

S = serializers
DAYS = "working days of the project calendar, positive when later"


def _nullable_float(**kw) -> S.FloatField:
    return S.FloatField(allow_null=True, **kw)


class BaselineIn(S.Serializer):
    name = S.CharField(max_length=100, help_text="a name of your choosing, unique")
    version = S.IntegerField(
        required=False,
        allow_null=True,
        min_value=1,
        max_value=2**31 - 1,
        help_text="the published schedule version to keep (default: the latest)",
    )
    make_current = S.BooleanField(
        default=True, help_text="make it the current baseline (default true)"
    )


class BaselineOut(S.ModelSerializer):
    version = S.IntegerField(source="version.number")
    captured_by = S.CharField(
        source="captured_by.username", allow_null=True, default=None
    )

    class Meta:
        model = Baseline
        fields = [
            "id",
            "name",
            "version",
            "captured_by",
            "captured_at",
            "current",
            "start",
            "finish",
            "data_date",
            "calendar",
        ]


class BaselineActivityOut(S.Serializer):
    name = S.CharField()
    start = S.DateField()
    finish = S.DateField()
    duration = S.IntegerField()
    planned_value = _nullable_float()
    calendar = S.CharField(allow_null=True)


class BaselineDetailOut(BaselineOut):
    activities = S.DictField(
        child=BaselineActivityOut(), help_text="activity key → its baseline"
    )

    class Meta(BaselineOut.Meta):
        fields = [*BaselineOut.Meta.fields, "activities"]


class CompareRowOut(S.Serializer):
    key = S.CharField()
    name = S.CharField()
    baseline_start = S.DateField(allow_null=True)
    baseline_finish = S.DateField(allow_null=True)
    start = S.DateField(allow_null=True)
    finish = S.DateField(allow_null=True)
    start_variance = S.IntegerField(allow_null=True, help_text=DAYS)
    finish_variance = S.IntegerField(allow_null=True, help_text=DAYS)


class CompareOut(S.Serializer):
    baseline = S.IntegerField()
    baseline_name = S.CharField()
    version = S.IntegerField()
    baseline_finish = S.DateField()
    finish = S.DateField()
    finish_variance = S.IntegerField(help_text=DAYS)
    unit = S.CharField()
    activities = CompareRowOut(many=True)


# -- the report ---------------------------------------------------------------


class ReportProjectOut(S.Serializer):
    id = S.IntegerField()
    name = S.CharField()
    start = S.DateField()
    data_date = S.DateField(help_text="the project's data date, else its start")
    data_date_set = S.BooleanField()
    calendar = S.CharField(allow_null=True)
    revision = S.IntegerField()
    progress_revision = S.IntegerField()


class NamedRefOut(S.Serializer):
    id = S.IntegerField()
    name = S.CharField()


class PreviousOut(S.Serializer):
    version = S.IntegerField()
    data_date = S.DateField()


class PlanSourceOut(S.Serializer):
    kind = S.CharField(help_text="published_version or forecast")
    version = S.IntegerField(allow_null=True)
    levelled = S.BooleanField()


class SourcesOut(S.Serializer):
    published_version = S.IntegerField(allow_null=True)
    baseline = NamedRefOut(allow_null=True)
    previous_report = PreviousOut(
        allow_null=True,
        help_text="the latest published version with an earlier data date",
    )
    plan = PlanSourceOut(help_text="the dates the look-ahead and crew load use")
    near_critical_threshold = S.IntegerField()
    day_unit = S.CharField()


class PathStepOut(S.Serializer):
    key = S.CharField()
    name = S.CharField()
    status = S.CharField()
    start = S.DateField()
    finish = S.DateField()
    baseline_finish = S.DateField(allow_null=True)
    finish_variance = S.IntegerField(allow_null=True, help_text=DAYS)
    driver = S.DictField(help_text="what drives the step (relation, crew, date)")


class FinishOut(S.Serializer):
    forecast = S.DateField()
    forecast_basis = S.ChoiceField(
        choices=["levelled", "critical_path"],
        help_text="levelled: the dates of the latest published levelled version, "
        "computed from the current network and data date; critical_path: the "
        "critical path of the current network and progress (crew limits not "
        "applied)",
    )
    forecast_version = S.IntegerField(
        allow_null=True, help_text="the published version a levelled forecast is"
    )
    critical_path_finish = S.DateField(
        help_text="the finish of the critical path alone, crews not levelled"
    )
    baseline = S.DateField(allow_null=True)
    previous_report = S.DateField(allow_null=True)
    published = S.DateField(allow_null=True)
    variance_to_baseline = S.IntegerField(allow_null=True, help_text=DAYS)
    variance_to_previous = S.IntegerField(allow_null=True, help_text=DAYS)
    reason = S.CharField(help_text="the driving path now, in words")
    driving_path = PathStepOut(many=True)


class PercentOut(S.Serializer):
    by_duration = _nullable_float()
    by_value = _nullable_float()
    by_value_reason = S.CharField(allow_null=True)
    activities_with_value = S.IntegerField()
    activities = S.IntegerField()
    finished = S.IntegerField()
    started = S.IntegerField()


class EarnedValueOut(S.Serializer):
    absent = S.CharField(required=False, help_text="why there are no figures")
    basis = S.ChoiceField(choices=["planned_value", "duration"], required=False)
    unit = S.CharField(required=False)
    bac = _nullable_float(required=False)
    pv = _nullable_float(required=False)
    ev = _nullable_float(required=False)
    ac = _nullable_float(
        required=False, help_text="the latest actual_cost of every activity, summed"
    )
    sv = _nullable_float(required=False)
    spi = _nullable_float(required=False)
    cv = _nullable_float(required=False)
    cpi = _nullable_float(required=False)
    eac = _nullable_float(required=False, help_text="BAC / CPI")
    eac_variant = S.CharField(required=False)
    eac_budget_rate = _nullable_float(required=False, help_text="AC + (BAC − EV)")
    eac_cpi_spi = _nullable_float(
        required=False, help_text="AC + (BAC − EV) / (CPI · SPI)"
    )
    tcpi = _nullable_float(required=False, help_text="(BAC − EV) / (BAC − AC)")
    vac = _nullable_float(required=False, help_text="BAC − EAC (BAC / CPI)")
    ac_reason = S.CharField(required=False, allow_null=True)


class EarnedScheduleOut(S.Serializer):
    absent = S.CharField(required=False)
    unit = S.CharField(required=False)
    es = _nullable_float(required=False)
    at = _nullable_float(required=False)
    pd = _nullable_float(required=False)
    sv_t = _nullable_float(required=False)
    spi_t = _nullable_float(required=False)
    ieac_t = _nullable_float(required=False)
    ieac_t_finish = S.DateField(required=False, allow_null=True)
    formula = S.CharField(required=False)


class CurvePointOut(S.Serializer):
    period = S.IntegerField()
    date = S.DateField()
    value = S.FloatField()


class SCurveOut(S.Serializer):
    absent = S.CharField(required=False)
    basis = S.CharField(required=False)
    planned = CurvePointOut(many=True)
    earned = CurvePointOut(many=True)


class MilestoneOut(S.Serializer):
    key = S.CharField()
    name = S.CharField()
    baseline = S.DateField(allow_null=True)
    forecast = S.DateField(allow_null=True)
    actual = S.DateField(allow_null=True)
    variance = S.IntegerField(allow_null=True, help_text=DAYS)
    slipped = S.BooleanField()


class CriticalRowOut(S.Serializer):
    key = S.CharField()
    name = S.CharField()
    start = S.DateField()
    finish = S.DateField()
    duration = S.IntegerField()
    total_float = S.IntegerField()
    critical = S.BooleanField()
    status = S.CharField()


class CriticalOut(S.Serializer):
    threshold = S.IntegerField()
    critical_count = S.IntegerField()
    near_critical_count = S.IntegerField()
    activities = CriticalRowOut(many=True)


class StartedOut(S.Serializer):
    key = S.CharField()
    name = S.CharField()
    actual_start = S.DateField()


class FinishedOut(S.Serializer):
    key = S.CharField()
    name = S.CharField()
    actual_finish = S.DateField()


class SinceOut(S.Serializer):
    # "from" is a keyword: the field is declared below.
    to = S.DateField()
    started = StartedOut(many=True)
    finished = FinishedOut(many=True)


SinceOut._declared_fields["from"] = S.DateField(allow_null=True)


class LateStartOut(S.Serializer):
    key = S.CharField()
    name = S.CharField()
    baseline_start = S.DateField()
    forecast_start = S.DateField(allow_null=True)
    days_late = S.IntegerField()


class LateFinishOut(S.Serializer):
    key = S.CharField()
    name = S.CharField()
    baseline_finish = S.DateField()
    forecast_finish = S.DateField(allow_null=True)
    days_late = S.IntegerField()


class LateOut(S.Serializer):
    absent = S.CharField(required=False)
    to_start = LateStartOut(many=True)
    to_finish = LateFinishOut(many=True)


class AheadActivityOut(S.Serializer):
    key = S.CharField()
    name = S.CharField()
    start = S.DateField()
    finish = S.DateField()
    status = S.CharField()
    zone = S.CharField(allow_null=True)
    units = S.IntegerField()


class AheadCrewOut(S.Serializer):
    crew = S.CharField(allow_null=True)
    name = S.CharField()
    activities = AheadActivityOut(many=True)


class AheadOut(S.Serializer):
    to = S.DateField()
    crews = AheadCrewOut(many=True)


AheadOut._declared_fields["from"] = S.DateField()


class CrewLoadRowOut(S.Serializer):
    crew = S.CharField()
    name = S.CharField()
    capacity = S.IntegerField()
    peak = S.ListField(child=S.IntegerField(), help_text="busiest day, per week")
    crew_days = S.ListField(child=S.IntegerField(), help_text="units × days, per week")
    over_capacity_weeks = S.ListField(child=S.DateField())


class CrewLoadOut(S.Serializer):
    weeks = S.ListField(child=S.DateField(), help_text="the Monday of each week")
    crews = CrewLoadRowOut(many=True)


class NightlyOut(S.Serializer):
    absent = S.CharField(required=False)
    version = S.IntegerField(required=False)
    published_at = S.DateTimeField(required=False)
    finish = S.DateField(required=False)
    changes = S.DictField(required=False, help_text="the version's change summary")


class ReportOut(S.Serializer):
    format = S.CharField(help_text="sitepace.report/1")
    caution = S.CharField()
    project = ReportProjectOut()
    sources = SourcesOut()
    finish = FinishOut()
    percent_complete = PercentOut()
    earned_value = EarnedValueOut()
    earned_schedule = EarnedScheduleOut()
    s_curve = SCurveOut()
    milestones = MilestoneOut(many=True)
    critical = CriticalOut()
    since_previous = SinceOut()
    late = LateOut()
    look_ahead = AheadOut()
    crew_load = CrewLoadOut()
    nightly = NightlyOut()
