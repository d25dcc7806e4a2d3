"""``manage.py relay_outbox``: publish waiting jobs and recover stalled runs (once, or in a loop)."""

from __future__ import annotations

import time
from typing import Any

from django.core.management.base import BaseCommand, CommandParser
from django.db import DatabaseError, close_old_connections

from testing.services.computation import relay_once


class Command(BaseCommand):
    help = "Publish the computation outbox to the broker and recover runs whose worker stopped."

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument(
            "--loop", action="store_true", help="Keep relaying every --interval seconds."
        )
        parser.add_argument("--interval", type=float, default=5.0)

    def handle(self, *args: Any, loop: bool = False, interval: float = 5.0, **options: Any) -> None:
        while True:
            try:
                counts = relay_once()
            except DatabaseError as exc:  # keep relaying through a database restart
                if not loop:
                    raise
                self.stderr.write(f"relay pass failed: {exc}")
                close_old_connections()
                counts = {}
            if not loop or any(counts.values()):
                self.stdout.write(", ".join(f"{k} {v}" for k, v in counts.items()))
            if not loop:
                return
            time.sleep(interval)
