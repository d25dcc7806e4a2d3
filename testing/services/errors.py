"""Errors services raise for a request that cannot be carried out as asked."""

from __future__ import annotations


class ServiceError(Exception):
    """A request the lab's rules refuse; the message is shown to the user as it is."""


class NotAllowed(ServiceError):
    """The user's role does not allow this action."""


class InvalidTransition(ServiceError):
    """A lifecycle move that the rules do not allow from the current state."""
