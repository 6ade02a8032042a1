"""fitdrag: drag coefficients from high-speed footage, with an honest uncertainty budget.

The public API for analysts and notebooks::

    import fitdrag
    track = fitdrag.read_track("throw.csv")
    result = fitdrag.fit_tracks(track, fitdrag.Sphere(mass=0.0027, diameter=0.040),
                                fitdrag.Air.from_conditions(21.0, 100800.0, 45.0))
    result.to_dict()["drag_coefficient"]

The names below are imported from their stage on first use (a lazy package face), so
``import fitdrag`` and ``fitdrag --version`` load nothing else.  The stages, in the order
data flows: ``physics`` (air, specimen, forces, drag laws, simulator), ``tracks`` (the track
hand-off and its CSV files), ``video`` (footage to pixel positions and calibration), ``geometry`` (camera model, pose from
the marker board, projection, row timing, synthetic perspective footage), ``fit``,
``uncertainty`` (GUM budget, Monte Carlo, decision rules), ``report`` and ``run`` (job files,
pipeline, records, demo); ``cli`` and ``commands`` sit on top.
"""

from fitdrag._lazy import lazy_face
from fitdrag._version import __version__

#: Each public name and the module that defines it.
_WHERE = {
    "OutputExistsError": "fitdrag.errors",
    "ModelComparison": "fitdrag.fit.compare",
    "compare_models": "fitdrag.fit.compare",
    "drag_coefficient_at": "fitdrag.fit.compare",
    "fit_tracks": "fitdrag.fit.fitting",
    "ViewFitResult": "fitdrag.fit.image_fit",
    "ViewResult": "fitdrag.fit.image_fit",
    "fit_views": "fitdrag.fit.image_fit",
    "fit_track_views": "fitdrag.fit.track_views",
    "PlanResult": "fitdrag.fit.plan",
    "plan_test": "fitdrag.fit.plan",
    "ViewPlanResult": "fitdrag.fit.plan_views",
    "plan_views": "fitdrag.fit.plan_views",
    "Refit": "fitdrag.fit.refit",
    "refit": "fitdrag.fit.refit",
    "FitResult": "fitdrag.fit.results",
    "ThrowResult": "fitdrag.fit.results",
    "Camera": "fitdrag.geometry.camera",
    "camera_from_footage": "fitdrag.geometry.footage_view",
    "view_from_footage": "fitdrag.geometry.footage_view",
    "view_from_track": "fitdrag.geometry.footage_view",
    "BoardPose": "fitdrag.geometry.pose",
    "MarkerBoard": "fitdrag.geometry.pose",
    "camera_pose_from_markers": "fitdrag.geometry.pose",
    "CameraView": "fitdrag.geometry.views",
    "PlanarGeometry": "fitdrag.geometry.planar",
    "ViewRenderer": "fitdrag.geometry.render_views",
    "render_view": "fitdrag.geometry.render_views",
    "render_views": "fitdrag.geometry.render_views",
    "ViewFootage": "fitdrag.geometry.view_truth",
    "ViewTruth": "fitdrag.geometry.view_truth",
    "write_view": "fitdrag.geometry.view_truth",
    "Air": "fitdrag.physics.air",
    "CIPMRangeWarning": "fitdrag.physics.air",
    "STANDARD_GRAVITY": "fitdrag.physics.air",
    "air_viscosity": "fitdrag.physics.air",
    "dry_air_density": "fitdrag.physics.air",
    "local_gravity": "fitdrag.physics.air",
    "moist_air_density": "fitdrag.physics.air",
    "sphere_correlation_names": "fitdrag.physics.drag_laws",
    "sphere_drag_coefficient": "fitdrag.physics.drag_laws",
    "DragModel": "fitdrag.physics.drag_model",
    "Flight3D": "fitdrag.physics.flight3d",
    "FlightModel3D": "fitdrag.physics.flight3d",
    "Launch3D": "fitdrag.physics.flight3d",
    "simulate_3d": "fitdrag.physics.flight3d",
    "Conditions": "fitdrag.physics.forces",
    "drag_model_names": "fitdrag.physics.registry",
    "get_drag_model": "fitdrag.physics.registry",
    "register_drag_model": "fitdrag.physics.registry",
    "Flight": "fitdrag.physics.simulate",
    "FlightModel": "fitdrag.physics.simulate",
    "Launch": "fitdrag.physics.simulate",
    "simulate": "fitdrag.physics.simulate",
    "Body": "fitdrag.physics.specimen",
    "Sphere": "fitdrag.physics.specimen",
    "render_certificate": "fitdrag.report.certificate",
    "DemoResult": "fitdrag.run.demo",
    "run_demo": "fitdrag.run.demo",
    "load_job": "fitdrag.run.job_file",
    "Records": "fitdrag.run.records",
    "read_track": "fitdrag.tracks.csv_file",
    "write_track": "fitdrag.tracks.csv_file",
    "Track": "fitdrag.tracks.track",
    "TrackImportWarning": "fitdrag.tracks.track",
    "file_sha256": "fitdrag.tracks.track",
    "InputQuantity": "fitdrag.uncertainty.gum",
    "budget_from_model": "fitdrag.uncertainty.gum",
    "monte_carlo": "fitdrag.uncertainty.monte_carlo",
    "Specification": "fitdrag.uncertainty.decision",
    "decide": "fitdrag.uncertainty.decision",
    "FootageTrack": "fitdrag.video.tracking",
    "track_footage": "fitdrag.video.tracking",
}

__all__ = ["__version__", *sorted(_WHERE)]

__getattr__, __dir__ = lazy_face(__name__, _WHERE)
