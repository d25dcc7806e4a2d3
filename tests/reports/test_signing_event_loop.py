"""Signing and verifying also work when the calling thread already runs an asyncio event loop (an
async server, or Playwright's synchronous API in the browser tests loading the demo report)."""

from __future__ import annotations

import asyncio
import io

from pypdf import PdfWriter

from reports import signing


def _blank_pdf() -> bytes:
    writer = PdfWriter()
    writer.add_blank_page(width=595, height=842)  # A4 in points
    out = io.BytesIO()
    writer.write(out)
    return out.getvalue()


def test_sign_and_verify_inside_a_running_event_loop() -> None:
    async def inside_a_loop() -> signing.SignatureCheck:
        signed = signing.sign_pdf(_blank_pdf(), reason="loop test", signer_name="Loop Tester")
        return signing.verify_pdf(signed)

    check = asyncio.run(inside_a_loop())
    assert check.valid, check.problem
    # The same file checked outside any loop agrees (pyHanko validates it either way).
    signed = signing.sign_pdf(_blank_pdf(), reason="loop test", signer_name="Loop Tester")
    assert signing.verify_pdf(signed).valid
    assert not signing.verify_pdf(signed[:-200] + b"\0" * 200).valid
