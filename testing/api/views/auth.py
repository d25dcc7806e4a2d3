"""API tokens: issue one for a username and password, revoke the one in use.

Tokens are django-rest-knox tokens: only a digest is stored, each expires
(``TAULINE_API_TOKEN_TTL_HOURS``), and revoking deletes it.
"""

from __future__ import annotations

from typing import Any

from drf_spectacular.utils import extend_schema
from knox.views import LoginView, LogoutView
from rest_framework.permissions import AllowAny
from rest_framework.request import Request
from rest_framework.response import Response

from testing.api.serializers.auth import TokenOut, TokenRequestIn
from testing.api.throttles import TokenAddressThrottle, TokenUsernameThrottle


class TokenObtainView(LoginView):
    """``POST {"username", "password"}`` → ``{"token", "expiry"}``."""

    authentication_classes: list[Any] = []  # the credentials are in the body
    permission_classes = [AllowAny]
    throttle_classes = [TokenAddressThrottle, TokenUsernameThrottle]

    @extend_schema(request=TokenRequestIn, responses={200: TokenOut}, auth=[])
    def post(self, request: Request, format: Any = None) -> Response:
        serializer = TokenRequestIn(data=request.data, context={"request": request})
        serializer.is_valid(raise_exception=True)
        request.user = serializer.validated_data["user"]
        response: Response = super().post(request, format=format)
        return response


class TokenRevokeView(LogoutView):
    """Revoke the token this request is signed with."""

    @extend_schema(request=None, responses={204: None})
    def post(self, request: Request, format: Any = None) -> Response:
        response: Response = super().post(request, format=format)
        return response
