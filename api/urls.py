from django.contrib import admin
from django.contrib.auth import views as auth_views
from django.http import JsonResponse
from django.urls import include, path
from drf_spectacular.views import SpectacularAPIView, SpectacularSwaggerView

from frontend.site_views import site
from scheduling.engine import SITE_CAUTION


def healthz(request):
    return JsonResponse({"status": "ok"})


urlpatterns = [
    path("healthz", healthz, name="healthz"),
    path("admin/", admin.site.urls),
    path(
        "app/login",
        auth_views.LoginView.as_view(extra_context={"caution": SITE_CAUTION}),
        name="login",
    ),
    path("app/logout", auth_views.LogoutView.as_view(), name="logout"),
    path("app/projects/", include("frontend.urls")),
    path("app/site/<str:project_id>/", site, name="site_progress"),
    path("api/v1/", include("api.v1.urls")),
    path("api/schema/", SpectacularAPIView.as_view(), name="schema"),
    path("api/docs/", SpectacularSwaggerView.as_view(url_name="schema"), name="docs"),
]

handler404 = "api.v1.errors.not_found_json"
handler500 = "api.v1.errors.server_error_json"
