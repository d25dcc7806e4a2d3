from django.apps import AppConfig


class ReportsConfig(AppConfig):
    name = "reports"
    verbose_name = "Reports and sign-off"
    default_auto_field = "django.db.models.BigAutoField"
