"""``manage.py loaddemo``: load the invented demonstration scenario (safe to run again)."""

from __future__ import annotations

from typing import Any

from django.conf import settings
from django.core.management.base import BaseCommand

from testing.services.demo import DEMO_LOGINS, load_demo


class Command(BaseCommand):
    help = "Load the demonstration scenario: an invented client, project, samples and two shear test sets."

    def handle(self, *args: Any, **options: Any) -> None:
        created = load_demo()
        self.stdout.write(
            "Demo scenario loaded." if created else "Demo scenario already present; nothing added."
        )
        self.stdout.write("")
        self.stdout.write(
            f"Demo logins (DEMO ONLY — change or remove before real use), password: {settings.TAULINE_DEMO_PASSWORD}"
        )
        for login in DEMO_LOGINS:
            self.stdout.write(f"  {login.username:<12} {login.role}")
