from django.apps import AppConfig


class TestingConfig(AppConfig):
    name = "testing"
    verbose_name = "Lab records and direct shear testing"
    default_auto_field = "django.db.models.BigAutoField"
