"""Make a self-signed certificate and key for signing reports (development and demo)."""

from __future__ import annotations

from typing import Any

from django.core.management.base import BaseCommand, CommandParser

from reports import signing


class Command(BaseCommand):
    help = (
        "Write a self-signed lab signing key and certificate to TAULINE_SIGNING_KEY_FILE / "
        "TAULINE_SIGNING_CERT_FILE (default MEDIA_ROOT/keys). For development and the demo; "
        "a lab should sign with a certificate from its own certificate authority."
    )

    def add_arguments(self, parser: CommandParser) -> None:
        parser.add_argument("--common-name", default=None)
        parser.add_argument("--days", type=int, default=3650)
        parser.add_argument("--overwrite", action="store_true", help="Replace an existing key.")

    def handle(self, *args: Any, **options: Any) -> None:
        key, cert = signing.make_lab_certificate(
            common_name=options["common_name"], days=options["days"], overwrite=options["overwrite"]
        )
        self.stdout.write(f"key: {key}\ncertificate: {cert}")
