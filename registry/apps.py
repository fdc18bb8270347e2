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
        from django.db.models.signals import post_migrate

        from registry import checks  # noqa: F401
        from registry.dbroles import grant_after_migrate
        from registry.geodesy.projsetup import configure_proj

        configure_proj(grid_dirs=[settings.REGISTRY.get("GEOID_DIR", "")])
        post_migrate.connect(grant_after_migrate, sender=self, dispatch_uid="registry_grant_runtime_role")
