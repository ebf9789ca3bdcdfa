"""Stable page addresses under /app/projects/ (bookmarks and tests rely on them)."""

from django.urls import path

from . import views

app_name = "frontend"

urlpatterns = [
    path("", views.projects, name="projects"),
    path("<str:project_id>/", views.overview, name="overview"),
    path("<str:project_id>/bars", views.bars, name="bars"),
    path("<str:project_id>/crews", views.crews, name="crews"),
]
