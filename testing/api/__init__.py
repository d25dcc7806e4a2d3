"""REST API v1 for the lab records and results: serializers, viewsets, permissions (thin).

Views parse, call one service or selector and render; every queryset is scoped through
``testing.access``; writes go through ``testing.services``.
"""
