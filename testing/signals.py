"""Signals other apps may listen to. ``testing`` never imports its listeners.

``demo_loaded``: sent once, after the transaction that created the demonstration scenario has
committed (so its computations have been handed over and its rows are visible to everyone).
Arguments: ``project_reference`` (the demo project), ``password`` (the demo logins' password) and
``now`` (the scenario's reference time). Not sent when ``loaddemo`` finds the scenario present.
"""

from __future__ import annotations

from django.dispatch import Signal

demo_loaded = Signal()
