"""Signals other apps may listen to. ``testing`` never imports its listeners.

``demo_loaded``: sent once, after the transaction that created the demonstration scenario has
committed (so its computations have been handed over and its rows are visible to everyone).
Arguments: ``project_reference`` (the demo project), ``password`` (the demo logins' password) and
``now`` (the scenario's reference time). Not sent when ``loaddemo`` finds the scenario present.

``relay_pass``: sent by every pass of the relay (``manage.py relay_outbox --loop``, run beside each
worker), after the computation outbox is published; other apps hand their own stalled background
work to the broker again. A receiver returns a dict of counts to report, or None. Sent robustly: a
receiver's error is logged and does not stop the relay.
"""

from __future__ import annotations

from django.dispatch import Signal

demo_loaded = Signal()
relay_pass = Signal()
