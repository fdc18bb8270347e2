"""JSON API routes. Each area adds its routes in its own module and is included here."""

from django.urls import path, re_path
from drf_spectacular.views import SpectacularAPIView, SpectacularSwaggerSplitView

from registry.api import accuracy as accuracy_api  # accuracy area
from registry.api import convert as convert_api  # geodesy area
from registry.api import documents as documents_api  # documents area
from registry.api import exports as exports_api
from registry.api import fieldwork as fieldwork_api  # fieldwork pages area
from registry.api import grids as grids_api  # geodesy area
from registry.api import jobs as jobs_api  # screening area
from registry.api import marks as marks_api
from registry.api import nearby as nearby_api  # search area
from registry.api import positions as positions_api
from registry.api import rinex as rinex_api  # RINEX occupations

app_name = "api"

urlpatterns = [
    path("schema/", SpectacularAPIView.as_view(), name="schema"),
    # Swagger UI with its start-up script served as a file (no inline script: registry/web/csp.py).
    path("docs/", SpectacularSwaggerSplitView.as_view(url_name="api:schema"), name="docs"),
    # accuracy statement (accuracy area)
    path("accuracy/", accuracy_api.AccuracyView.as_view(), name="accuracy"),
    # exports (import-export area); before marks/<code>/ so that the names never read as a code
    path("marks/export.csv", exports_api.MarksExportCsvView.as_view(), name="marks-export-csv"),
    path("marks/export.geojson", exports_api.MarksExportGeoJSONView.as_view(), name="marks-export-geojson"),
    path("marks/export.gpkg", exports_api.MarksExportGeoPackageView.as_view(), name="marks-export-gpkg"),
    path("marks/export", exports_api.MarksExportView.as_view(), name="marks-export"),
    # nearby marks (search area); before marks/<code>/ so that "near" never reads as a code
    path("marks/near/", nearby_api.MarksNearView.as_view(), name="marks-near"),
    # marks and positions (services area)
    path("marks/", marks_api.MarkListView.as_view(), name="mark-list"),
    path("marks/<str:code>/", marks_api.MarkDetailView.as_view(), name="mark-detail"),
    re_path(r"^marks/(?P<code>[^/]+)/status/?$", marks_api.MarkStatusView.as_view(), name="mark-status"),
    re_path(
        r"^marks/(?P<code>[^/]+)/clear-suspect/?$", marks_api.MarkClearSuspectView.as_view(), name="mark-clear-suspect"
    ),
    path("marks/<str:code>/positions/", positions_api.MarkPositionsView.as_view(), name="mark-positions"),
    # visits, occupations, attachments (fieldwork pages area)
    path("marks/<str:code>/visits/", fieldwork_api.MarkVisitsView.as_view(), name="mark-visits"),
    path("marks/<str:code>/occupations/", fieldwork_api.MarkOccupationsView.as_view(), name="mark-occupations"),
    path(
        "marks/<str:code>/occupations/rinex/",
        rinex_api.MarkOccupationFromRinexView.as_view(),
        name="mark-occupation-from-rinex",
    ),
    path("marks/<str:code>/attachments/", fieldwork_api.MarkAttachmentsView.as_view(), name="mark-attachments"),
    path("positions/<int:position_id>/", positions_api.PositionDetailView.as_view(), name="position-detail"),
    re_path(r"^proposals/?$", positions_api.ProposalQueueView.as_view(), name="proposals"),
    re_path(r"^marks/(?P<code>[^/]+)/combine/?$", positions_api.MarkCombineView.as_view(), name="mark-combine"),
    re_path(
        r"^positions/(?P<position_id>[0-9]+)/movement-check/?$",
        positions_api.PositionMovementView.as_view(),
        name="position-movement-check",
    ),
    re_path(
        r"^positions/(?P<position_id>[0-9]+)/publish/?$",
        positions_api.PositionPublishView.as_view(),
        name="position-publish",
    ),
    re_path(
        r"^positions/(?P<position_id>[0-9]+)/reject/?$",
        positions_api.PositionRejectView.as_view(),
        name="position-reject",
    ),
    re_path(
        r"^positions/(?P<position_id>[0-9]+)/withdraw/?$",
        positions_api.PositionWithdrawView.as_view(),
        name="position-withdraw",
    ),
    # jobs and base screening (screening area)
    path("jobs/", jobs_api.JobListView.as_view(), name="job-list"),
    path("jobs/<str:code>/", jobs_api.JobDetailView.as_view(), name="job-detail"),
    path("jobs/<str:code>/screening/", jobs_api.JobScreeningView.as_view(), name="job-screening"),
    path("screening/", jobs_api.SiteScreeningView.as_view(), name="screening"),
    # documents: sheets, control reports, signing, public verification (documents area)
    path("marks/<str:code>/sheet/", documents_api.SheetBuildView.as_view(), name="sheet-build"),
    path("jobs/<str:code>/report/", documents_api.ReportBuildView.as_view(), name="report-build"),
    path("documents/", documents_api.DocumentListView.as_view(), name="document-list"),
    path("documents/builds/<int:build_id>/", documents_api.BuildDetailView.as_view(), name="document-build"),
    path("documents/<str:code>/", documents_api.DocumentDetailView.as_view(), name="document-detail"),
    path("documents/<str:code>/pdf", documents_api.DocumentPdfView.as_view(), name="document-pdf"),
    path("documents/<str:code>/check/", documents_api.DocumentCheckView.as_view(), name="document-check"),
    path("documents/<str:code>/sign/", documents_api.DocumentSignView.as_view(), name="document-sign"),
    path("verify/", documents_api.VerifyView.as_view(), name="verify"),
    # point conversion (geodesy area)
    path("convert/", convert_api.ConvertView.as_view(), name="convert"),
    path("grids/", grids_api.CustomGridListView.as_view(), name="grid-list"),
]
