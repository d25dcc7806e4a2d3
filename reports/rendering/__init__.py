"""Report rendering in three steps: context (all queries) -> HTML (templates) -> PDF (WeasyPrint)."""
