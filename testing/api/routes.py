"""Registers the testing app's viewsets on the one API router (see ``labsite/api_urls.py``)."""

from __future__ import annotations

from rest_framework.routers import BaseRouter

from testing.api.views import equipment, records, results, shear


def register(router: BaseRouter) -> None:
    router.register("organisations", records.OrganisationViewSet, basename="organisation")
    router.register("projects", records.ProjectViewSet, basename="project")
    router.register("boreholes", records.BoreholeViewSet, basename="borehole")
    router.register("samples", records.SampleViewSet, basename="sample")
    router.register("specimens", records.SpecimenViewSet, basename="specimen")
    router.register("test-sets", shear.TestSetViewSet, basename="test-set")
    router.register("stages", shear.StageViewSet, basename="stage")
    router.register("computation-runs", results.ComputationRunViewSet, basename="computation-run")
    router.register("stage-results", results.StageResultViewSet, basename="stage-result")
    router.register("envelopes", results.EnvelopeViewSet, basename="envelope")
    router.register("throughput", results.ThroughputViewSet, basename="throughput")
    router.register("apparatus", equipment.ApparatusViewSet, basename="apparatus")
    router.register("force-devices", equipment.ForceDeviceViewSet, basename="force-device")
    router.register("calibrations", equipment.CalibrationViewSet, basename="calibration")
    router.register("gauges", equipment.GaugeViewSet, basename="gauge")
