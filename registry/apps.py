from django.apps import AppConfig


class RegistryConfig(AppConfig):
    name = "registry"
    verbose_name = "Control-mark registry"
    default_auto_field = "django.db.models.BigAutoField"

    def ready(self) -> None:
        # System checks (PROJ data, geoid grids, PostGIS, fonts) register themselves on import.
        from registry import checks  # noqa: F401
