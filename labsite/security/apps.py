from __future__ import annotations

from django.apps import AppConfig


class SecurityConfig(AppConfig):
    name = "labsite.security"
    label = "labsite_security"
    verbose_name = "Sign-in protection"

    def ready(self) -> None:
        from labsite.security import receivers  # noqa: F401  (connects the signal receivers)
