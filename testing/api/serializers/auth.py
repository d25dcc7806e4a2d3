"""Token requests."""

from __future__ import annotations

from typing import Any

from django.contrib.auth import authenticate
from rest_framework import serializers


class TokenRequestIn(serializers.Serializer):
    username = serializers.CharField(max_length=150)
    password = serializers.CharField(max_length=128, trim_whitespace=False, write_only=True)

    def validate(self, attrs: dict[str, Any]) -> dict[str, Any]:
        request = self.context.get("request")
        user = authenticate(
            request=getattr(request, "_request", None),
            username=attrs["username"],
            password=attrs["password"],
        )
        # One message for a wrong password, an unknown name and a deactivated account.
        if user is None or not user.is_active:
            raise serializers.ValidationError("Unable to sign in with that username and password.")
        attrs["user"] = user
        return attrs


class TokenOut(serializers.Serializer):
    token = serializers.CharField(help_text="Send as `Authorization: Token <token>`. Shown once.")
    expiry = serializers.DateTimeField(help_text="When the token stops working (UTC).")
