"""fitdrag: drag coefficients from high-speed footage, with an honest uncertainty budget."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("fitdrag")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = "0.0.0+unknown"

__all__ = ["__version__"]
