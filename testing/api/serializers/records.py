"""Organisations, projects, boreholes, samples (with lifecycle events) and specimens."""

from __future__ import annotations

from django.db.models import Q
from rest_framework import serializers

from testing import access
from testing.api.fields import ScopedRelatedField
from testing.api.serializers.base import InputSerializer, OutputSerializer
from testing.models import (
    Borehole,
    Organisation,
    Project,
    Sample,
    SampleEvent,
    SampleStatus,
    Specimen,
)

# --- Organisations (lab staff only) -----------------------------------------------------------


class OrganisationOut(OutputSerializer):
    contact_email = serializers.CharField(read_only=True, help_text="Blank when not recorded.")

    class Meta:
        model = Organisation
        fields = [
            "id",
            "name",
            "code",
            "address",
            "contact_name",
            "contact_email",
            "is_active",
            "created_at",
        ]


class OrganisationIn(InputSerializer):
    class Meta:
        model = Organisation
        fields = ["name", "code", "address", "contact_name", "contact_email"]


# --- Projects -------------------------------------------------------------------------------


class ProjectOut(OutputSerializer):
    organisation_name = serializers.CharField(source="organisation.name", read_only=True)
    sample_count = serializers.IntegerField(read_only=True)

    class Meta:
        model = Project
        fields = [
            "id",
            "organisation",
            "organisation_name",
            "reference",
            "client_reference",
            "name",
            "site_name",
            "site_location",
            "client_engineer",
            "agreed_turnaround_days",
            "created_at",
            "sample_count",
        ]


def _active_organisations(user: access.AnyUser) -> Q:
    return Q(is_active=True)


class ProjectIn(InputSerializer):
    organisation = ScopedRelatedField(model=Organisation, scope=_active_organisations)

    class Meta:
        model = Project
        fields = [
            "organisation",
            "reference",
            "client_reference",
            "name",
            "site_name",
            "site_location",
            "client_engineer",
            "agreed_turnaround_days",
        ]
        extra_kwargs = {"agreed_turnaround_days": {"min_value": 1}}


# --- Boreholes ------------------------------------------------------------------------------


class BoreholeOut(OutputSerializer):
    project_reference = serializers.CharField(source="project.reference", read_only=True)

    class Meta:
        model = Borehole
        fields = [
            "id",
            "project",
            "project_reference",
            "reference",
            "ground_level_m",
            "easting_m",
            "northing_m",
            "final_depth_m",
            "drilled_on",
        ]


class BoreholeIn(InputSerializer):
    project = ScopedRelatedField(model=Project, scope=access.project_filter)

    class Meta:
        model = Borehole
        fields = [
            "project",
            "reference",
            "ground_level_m",
            "easting_m",
            "northing_m",
            "final_depth_m",
            "drilled_on",
        ]


# --- Samples --------------------------------------------------------------------------------


class SampleOut(OutputSerializer):
    project = serializers.IntegerField(source="borehole.project_id", read_only=True)
    borehole_reference = serializers.CharField(source="borehole.reference", read_only=True)

    class Meta:
        model = Sample
        fields = [
            "id",
            "project",
            "borehole",
            "borehole_reference",
            "reference",
            "depth_top_m",
            "depth_base_m",
            "sample_type",
            "description",
            "received_on",
            "condition_on_receipt",
            "storage_location",
            "due_on",
            "status",
            "status_changed_at",
        ]


class SampleIn(InputSerializer):
    """A sample logged in as received; its state starts at ``received`` and moves only by
    ``POST /samples/{id}/transition/``."""

    borehole = ScopedRelatedField(model=Borehole, scope=access.borehole_filter)

    class Meta:
        model = Sample
        fields = [
            "borehole",
            "reference",
            "depth_top_m",
            "depth_base_m",
            "sample_type",
            "description",
            "received_on",
            "due_on",
            "condition_on_receipt",
            "storage_location",
        ]
        extra_kwargs = {"received_on": {"required": False}}


class SampleEventOut(OutputSerializer):
    by = serializers.SerializerMethodField()
    from_status = serializers.CharField(
        read_only=True, help_text="The state before the move; blank for the first event."
    )

    class Meta:
        model = SampleEvent
        fields = ["id", "at", "by", "from_status", "to_status", "note"]

    def get_by(self, event: SampleEvent) -> str:
        """Who moved the sample: full name, or the username when no name is recorded."""
        return event.by.get_full_name() or event.by.get_username()


class SampleTransitionIn(serializers.Serializer):
    to_status = serializers.ChoiceField(choices=SampleStatus.choices)
    note = serializers.CharField(
        required=False,
        allow_blank=True,
        max_length=2000,
        help_text="Required for hold and disposal.",
    )


# --- Specimens ------------------------------------------------------------------------------

SPECIMEN_FIELDS = [
    "reference",
    "depth_top_m",
    "description",
    "preparation",
    "preparation_notes",
    "target_dry_density_mg_m3",
    "shape",
    "length_mm",
    "width_mm",
    "diameter_mm",
    "height_mm",
    "initial_mass_g",
    "final_mass_g",
    "dry_mass_g",
    "max_particle_size_mm",
    "particle_density_mg_m3",
    "particle_density_assumed",
]


class SpecimenOut(OutputSerializer):
    class Meta:
        model = Specimen
        fields = ["id", "sample", *SPECIMEN_FIELDS]


class SpecimenIn(InputSerializer):
    sample = ScopedRelatedField(model=Sample, scope=access.sample_filter)

    class Meta:
        model = Specimen
        fields = ["sample", *SPECIMEN_FIELDS]
