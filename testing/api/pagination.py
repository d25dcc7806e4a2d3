"""Page-number pagination whose page size a caller may choose, up to a cap."""

from __future__ import annotations

from rest_framework.pagination import PageNumberPagination

MAX_PAGE_SIZE = 200


class CappedPagination(PageNumberPagination):
    """``?page=N&page_size=M``; ``page_size`` above 200 is served as 200, never more."""

    page_size_query_param = "page_size"
    max_page_size = MAX_PAGE_SIZE
