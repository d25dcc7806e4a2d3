"""API viewsets, one module per sub-domain; ``testing.api.routes.register`` wires them."""
