from django.apps import AppConfig


class ReportsConfig(AppConfig):
    name = "reports"
    verbose_name = "Reports and sign-off"
    default_auto_field = "django.db.models.BigAutoField"

    def ready(self) -> None:
        # testing never imports reports: it announces the demo, and reports adds its report.
        from reports.demo import on_demo_loaded
        from reports.services import revisions_render_republish
        from testing.signals import demo_loaded, relay_pass

        demo_loaded.connect(on_demo_loaded, dispatch_uid="reports.demo_report")
        # Revisions left "being issued" while the broker was down are rendered once it is back.
        relay_pass.connect(revisions_render_republish, dispatch_uid="reports.render_republish")
