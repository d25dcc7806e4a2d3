"""Sign-in protection: lockout after repeated failures, session time limits, revoking access.

A small Django app so its signal receivers are connected in every process (web, worker, shell).
"""
