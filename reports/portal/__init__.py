"""The client portal: read-only views of an organisation's issued revisions."""
