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
from fitdrag.fitting import FitResult, ThrowResult, fit_tracks  # noqa: E402
from fitdrag.forces import (  # noqa: E402
    Conditions,
    DragModel,
    drag_model_names,
    get_drag_model,
    register_drag_model,
)
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

__all__ = [
    "__version__",
    "Air",
    "Body",
    "CIPMRangeWarning",
    "Conditions",
    "DragModel",
    "FitResult",
    "Flight",
    "FlightModel",
    "Launch",
    "OutputExistsError",
    "STANDARD_GRAVITY",
    "Sphere",
    "ThrowResult",
    "Track",
    "TrackImportWarning",
    "air_viscosity",
    "drag_model_names",
    "dry_air_density",
    "file_sha256",
    "fit_tracks",
    "get_drag_model",
    "local_gravity",
    "moist_air_density",
    "read_track",
    "register_drag_model",
    "simulate",
    "write_track",
]
