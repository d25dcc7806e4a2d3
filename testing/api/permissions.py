"""Who may call the API at all. Which *records* a caller sees is decided by ``testing.access``.

- Anonymous callers and deactivated accounts are refused (401).
- Client users read; every write is refused with 403 before any record is looked up, so a write
  to another organisation's record answers exactly like a write to one that does not exist.
- Lab staff may write; the service then checks the role for that action.
"""

from __future__ import annotations

from rest_framework.permissions import SAFE_METHODS, BasePermission
from rest_framework.request import Request
from rest_framework.views import APIView

from testing import access


class LabAccess(BasePermission):
    message = "Client accounts are read-only; lab records are changed by lab staff."

    def has_permission(self, request: Request, view: APIView) -> bool:
        user = request.user
        if access.profile_of(user) is None:
            self.message = "This account has no access to lab records."
            return False
        return request.method in SAFE_METHODS or access.is_lab_staff(user)


class LabStaffOnly(BasePermission):
    message = "Only lab staff can use this resource."

    def has_permission(self, request: Request, view: APIView) -> bool:
        return access.is_lab_staff(request.user)
