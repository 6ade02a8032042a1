"""fitdrag: drag coefficients from high-speed footage, with an honest uncertainty budget.

The public API for analysts and notebooks::

    import fitdrag
    track = fitdrag.read_track("throw.csv")
    result = fitdrag.fit_tracks(track, fitdrag.Sphere(mass=0.0027, diameter=0.040),
                                fitdrag.Air.from_conditions(21.0, 100800.0, 45.0))
    result.to_dict()["drag_coefficient"]
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("fitdrag")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = "0.0.0+unknown"

from fitdrag.air import (  # noqa: E402
    STANDARD_GRAVITY,
    Air,
    CIPMRangeWarning,
    air_viscosity,
    dry_air_density,
    local_gravity,
    moist_air_density,
)
from fitdrag.budget import InputQuantity, budget_from_model, monte_carlo  # noqa: E402
from fitdrag.compare import ModelComparison, compare_models, drag_coefficient_at  # noqa: E402
from fitdrag.demo import DemoResult, run_demo  # noqa: E402
from fitdrag.drag_models import sphere_correlation_names, sphere_drag_coefficient  # noqa: E402
from fitdrag.fitting import FitResult, Refit, ThrowResult, fit_tracks, refit  # noqa: E402
from fitdrag.forces import (  # noqa: E402
    Conditions,
    DragModel,
    drag_model_names,
    get_drag_model,
    register_drag_model,
)
from fitdrag.jobs import load_job  # noqa: E402
from fitdrag.plan import PlanResult, plan_test  # noqa: E402
from fitdrag.records import Records  # noqa: E402
from fitdrag.report.certificate import render_certificate  # noqa: E402
from fitdrag.simulate import Flight, FlightModel, Launch, simulate  # noqa: E402
from fitdrag.specimen import Body, Sphere  # noqa: E402
from fitdrag.tracks import (  # noqa: E402
    OutputExistsError,
    Track,
    TrackImportWarning,
    file_sha256,
    read_track,
    write_track,
)
from fitdrag.verdict import Specification, decide  # noqa: E402
from fitdrag.video import FootageTrack, track_footage  # noqa: E402

__all__ = [
    "__version__",
    "Air",
    "Body",
    "CIPMRangeWarning",
    "Conditions",
    "DemoResult",
    "DragModel",
    "FitResult",
    "Flight",
    "FlightModel",
    "FootageTrack",
    "InputQuantity",
    "Launch",
    "ModelComparison",
    "PlanResult",
    "Records",
    "Refit",
    "OutputExistsError",
    "STANDARD_GRAVITY",
    "Specification",
    "Sphere",
    "ThrowResult",
    "Track",
    "TrackImportWarning",
    "air_viscosity",
    "budget_from_model",
    "compare_models",
    "decide",
    "drag_coefficient_at",
    "drag_model_names",
    "dry_air_density",
    "file_sha256",
    "fit_tracks",
    "get_drag_model",
    "load_job",
    "local_gravity",
    "moist_air_density",
    "monte_carlo",
    "plan_test",
    "read_track",
    "refit",
    "register_drag_model",
    "render_certificate",
    "run_demo",
    "simulate",
    "sphere_correlation_names",
    "sphere_drag_coefficient",
    "track_footage",
    "write_track",
]
