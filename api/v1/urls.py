from django.urls import include, path
from rest_framework.routers import DefaultRouter, SimpleRouter

from . import views

# Collections end with a slash; single resources such as .../network need
# none. Both spellings are accepted, so no client meets a redirect.
router = DefaultRouter()
router.trailing_slash = "/?"
router.register("projects", views.ProjectViewSet, basename="project")

nested = SimpleRouter()
nested.trailing_slash = "/?"
nested.register("calendars", views.CalendarViewSet, basename="calendar")
nested.register("crews", views.CrewViewSet, basename="crew")
nested.register("activities", views.ActivityViewSet, basename="activity")
nested.register("relations", views.RelationViewSet, basename="relation")
nested.register("members", views.MemberViewSet, basename="member")
nested.register("runs", views.RunViewSet, basename="run")
nested.register("progress", views.ProgressViewSet, basename="progress")
nested.register("schedule/versions", views.VersionViewSet, basename="version")
nested.register("baselines", views.BaselineViewSet, basename="baseline")

urlpatterns = [
    path("auth/token", views.TokenView.as_view(), name="token"),
    path(
        "projects/<int:project_pk>/report",
        views.ReportView.as_view(),
        name="project-report",
    ),
    path("projects/<int:project_pk>/", include(nested.urls)),
    path("", include(router.urls)),
]
