"""Command-line layer of cfarvec: a thin shell over the refmodel, vectors and hdl_tb APIs."""


def __getattr__(name: str):
    # The version is looked up only when asked for: the package metadata lookup costs more than
    # the rest of ``cfarvec --help``.
    if name == "__version__":
        from importlib.metadata import PackageNotFoundError, version

        try:
            return version("cfarvec")
        except PackageNotFoundError:  # running from a source tree without install
            return "0.0.0+unknown"
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
