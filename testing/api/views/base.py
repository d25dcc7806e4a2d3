"""The shape every record viewset shares: scoped reads, writes through one service call."""

from __future__ import annotations

from typing import Any

from django.contrib.auth.models import User
from django.db.models import Model, QuerySet
from rest_framework import mixins, status, viewsets
from rest_framework.request import Request
from rest_framework.response import Response
from rest_framework.serializers import BaseSerializer

from testing.api.permissions import LabAccess


class RecordViewSet(mixins.ListModelMixin, mixins.RetrieveModelMixin, viewsets.GenericViewSet):
    """List and retrieve from ``scoped_queryset``; ids that are not digits never reach a query."""

    permission_classes = [LabAccess]
    lookup_value_regex = r"[0-9]{1,18}"

    def scoped_queryset(self) -> QuerySet[Any]:
        raise NotImplementedError

    def get_queryset(self) -> QuerySet[Any]:
        return self.scoped_queryset()

    @property
    def acting_user(self) -> User:
        user = self.request.user
        assert isinstance(user, User)  # LabAccess let only signed-in lab users through
        return user


class CreateViaServiceMixin:
    """``POST`` validates with ``input_serializer_class``, calls ``perform_service`` and answers
    with the new record as the list shows it (re-read through the scoped queryset)."""

    input_serializer_class: type[BaseSerializer[Any]]

    def perform_service(self, data: dict[str, Any]) -> Model:
        raise NotImplementedError

    def create(self, request: Request, *args: Any, **kwargs: Any) -> Response:
        view: Any = self
        serializer = self.input_serializer_class(
            data=request.data, context=view.get_serializer_context()
        )
        serializer.is_valid(raise_exception=True)
        created = self.perform_service(dict(serializer.validated_data))
        instance = view.get_queryset().get(pk=created.pk)
        return Response(view.get_serializer(instance).data, status=status.HTTP_201_CREATED)
