"""The Django admin, for staff: projects and their rows, read and fixed by hand.

Edits here bypass the network checks of the API; the API is the way to change
a schedule. Staff use the admin to look, to manage members and to repair.
"""

from django.contrib import admin

from .models import (
    Activity,
    Baseline,
    Calendar,
    ComputedSchedule,
    Crew,
    Membership,
    ProgressEntry,
    Project,
    Relation,
)


class MembershipInline(admin.TabularInline):
    model = Membership
    extra = 0
    autocomplete_fields = ["user"]


@admin.register(Project)
class ProjectAdmin(admin.ModelAdmin):
    list_display = ["id", "name", "start", "data_date", "deadline", "revision"]
    search_fields = ["name"]
    inlines = [MembershipInline]
    readonly_fields = ["revision", "created_at", "updated_at"]


@admin.register(Activity)
class ActivityAdmin(admin.ModelAdmin):
    list_display = ["key", "name", "project", "duration", "zone", "trade", "version"]
    list_filter = ["project"]
    search_fields = ["key", "name"]


@admin.register(Relation)
class RelationAdmin(admin.ModelAdmin):
    list_display = ["id", "project", "pred", "succ", "type", "lag", "lag_unit"]
    list_filter = ["project", "type"]


@admin.register(Calendar)
class CalendarAdmin(admin.ModelAdmin):
    list_display = ["key", "name", "project"]


@admin.register(Crew)
class CrewAdmin(admin.ModelAdmin):
    list_display = ["key", "name", "project", "capacity"]


@admin.register(Membership)
class MembershipAdmin(admin.ModelAdmin):
    list_display = ["user", "project", "role"]
    list_filter = ["role"]


@admin.register(ComputedSchedule)
class ComputedScheduleAdmin(admin.ModelAdmin):
    list_display = ["project", "revision", "computed_at"]


class ReadOnlyAdmin(admin.ModelAdmin):
    """Rows that are never changed once stored: staff may only read them."""

    def has_add_permission(self, request):
        return False

    def has_change_permission(self, request, obj=None):
        return False

    def has_delete_permission(self, request, obj=None):
        return False


@admin.register(ProgressEntry)
class ProgressEntryAdmin(ReadOnlyAdmin):
    """Progress entries are append-only: staff may read them, never change or
    delete one (a correction is a new entry, made through the API)."""

    list_display = [
        "id",
        "project",
        "activity_key",
        "kind",
        "actual_start",
        "actual_finish",
        "percent_complete",
        "remaining",
        "recorded_by",
        "recorded_at",
    ]
    list_filter = ["project", "kind", "delay_reason"]
    search_fields = ["activity_key", "note"]


@admin.register(Baseline)
class BaselineAdmin(ReadOnlyAdmin):
    """Baselines never change: staff may read them; a scheduler captures one
    and chooses the current one through the API."""

    list_display = ["id", "project", "name", "version", "current", "captured_at"]
    list_filter = ["project", "current"]
    search_fields = ["name"]
