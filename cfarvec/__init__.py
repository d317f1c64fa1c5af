"""Command-line layer of cfarvec: a thin shell over the refmodel, vectors and hdl_tb APIs."""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("cfarvec")
except PackageNotFoundError:  # running from a source tree without install
    __version__ = "0.0.0+unknown"
