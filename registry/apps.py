from django.apps import AppConfig


class RegistryConfig(AppConfig):
    name = "registry"
    verbose_name = "Control-mark registry"
    default_auto_field = "django.db.models.BigAutoField"

    def ready(self) -> None:
        # System checks (PROJ data, geoid grids, PostGIS, fonts) register themselves on import.
        # PROJ: network off, the office's geoid folder on PROJ's search path (settings read here, at
        # app start, never at import time).
        from django.conf import settings

        from registry import checks  # noqa: F401
        from registry.geodesy.projsetup import configure_proj

        configure_proj(grid_dirs=[settings.REGISTRY.get("GEOID_DIR", "")])
