"""Server-rendered pages. Each area adds its ``path(...)`` lines below its own comment."""

from django.conf import settings
from django.urls import path

from registry.web import (
    auth_views,
    combine_views,
    convert_views,
    document_views,
    fieldwork_views,
    grid_views,
    import_views,
    job_views,
    mark_views,
    nearby_views,
    occupation_import_views,
    position_views,
    proposal_views,
    views,
)
from registry.web.accuracy_views import accuracy_page  # accuracy area

app_name = "web"

urlpatterns: list = [
    # pages: sign in/out, marks
    path("", views.home, name="home"),
    path("signin/", auth_views.SignInView.as_view(), name="login"),
    path("signout/", auth_views.SignOutView.as_view(), name="logout"),
    path("marks/", mark_views.mark_list, name="mark-list"),
    path("marks/new/", mark_views.mark_new, name="mark-create"),
    # import (import-export area); before marks/<code>/ so that "import" never reads as a code
    path("marks/import/", import_views.import_page, name="import"),
    path("marks/import/runs/<int:run_id>/", import_views.import_run_page, name="import-run"),
    path("marks/import/runs/<int:run_id>/problems.csv", import_views.import_run_errors, name="import-run-errors"),
    # marks near a point (fieldwork pages area); before marks/<code>/ so that "near" never reads as a code
    path("marks/near/", nearby_views.marks_near_page, name="marks-near"),
    # batch occupation results from a CSV file (preview, then record)
    path("occupations/import/", occupation_import_views.occupation_import_page, name="occupation-import"),
    path("marks/<str:code>/", mark_views.mark_page, name="mark-detail"),
    path("marks/<str:code>/edit/", mark_views.mark_edit, name="mark-edit"),
    # a free text in full, behind a page's "show all" (registry/services/limits.py)
    path("marks/<str:code>/text/<str:what>/", mark_views.mark_text, name="mark-text"),
    path("marks/<str:code>/text/<str:what>/<int:pk>/", mark_views.mark_text, name="mark-text-item"),
    # fieldwork, positions and status (fieldwork pages area)
    path("marks/<str:code>/visits/new/", fieldwork_views.visit_new, name="visit-create"),
    path("marks/<str:code>/occupations/new/", fieldwork_views.occupation_new, name="occupation-create"),
    path("marks/<str:code>/status/", fieldwork_views.mark_status, name="mark-status"),
    path("marks/<str:code>/clear-suspect/", fieldwork_views.mark_clear_suspect_page, name="mark-clear-suspect"),
    path("marks/<str:code>/positions/new/", position_views.position_new, name="position-create"),
    path("proposals/", proposal_views.proposals_page, name="proposals"),
    path("marks/<str:code>/combine/", combine_views.combine_page, name="mark-combine"),
    path(
        "marks/<str:code>/positions/<int:position_id>/<str:action>/",
        position_views.position_decide,
        name="position-decide",
    ),
    # tools (accuracy area)
    path("tools/accuracy/", accuracy_page, name="accuracy"),
    # tools (geodesy area)
    path("tools/convert/", convert_views.convert_page, name="convert"),
    path("tools/grids/", grid_views.grid_list, name="grid-list"),
    # jobs and base screening (screening area)
    path("jobs/", job_views.job_list, name="job-list"),
    path("jobs/new/", job_views.job_new, name="job-create"),
    path("jobs/<str:code>/", job_views.job_page, name="job-detail"),
    path("jobs/<str:code>/edit/", job_views.job_edit, name="job-edit"),
    path("jobs/<str:code>/notes/", job_views.job_notes, name="job-notes"),
    path("jobs/<str:code>/control.csv", job_views.job_export_csv, name="job-export-csv"),
    path("jobs/<str:code>/control.geojson", job_views.job_export_geojson, name="job-export-geojson"),
    # documents: sheets, control reports, signing; public verification (documents area)
    path("marks/<str:code>/sheet/", document_views.sheet_build_view, name="sheet-build"),
    path("jobs/<str:code>/report/", document_views.report_build_view, name="report-build"),
    path("documents/", document_views.document_list, name="document-list"),
    path("documents/builds/<int:build_id>/", document_views.build_page, name="document-build"),
    path("documents/builds/<int:build_id>/status.json", document_views.build_status_json, name="document-build-status"),
    path("documents/builds/<int:build_id>/retry/", document_views.build_retry_view, name="document-build-retry"),
    path("documents/<str:code>/", document_views.document_page, name="document-detail"),
    path("documents/<str:code>/pdf/", document_views.document_download, name="document-pdf"),
    path("documents/<str:code>/check/", document_views.document_check_view, name="document-check"),
    path("documents/<str:code>/sign/", document_views.document_sign_view, name="document-sign"),
    path("verify/", document_views.verify_page, name="verify-upload"),
    path("verify/<str:code>/", document_views.verify_page, name="verify"),
    path("ca/office-ca.pem", document_views.ca_certificate, name="ca-certificate"),
    path("ca/office-ca.crl", document_views.ca_crl, name="ca-crl"),
    # uploaded files in development (DEBUG); the web server serves them in production
    path(f"{settings.MEDIA_URL.strip('/')}/<path:path>", views.media_file, name="media"),
]
