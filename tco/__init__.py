"""tco — battery-electric versus diesel heavy trucks on a specific job.

Energy from a road-load physics model on the user's duty cycle, a yearly cash-flow model,
emissions on tank-to-wheel and well-to-wheel bases, uncertainty analysis, and reports.

Notebook use::

    import tco
    loaded = tco.load_scenario("inputs/demo.toml")
    result = tco.evaluate(loaded)
    result.trucks["Diesel 6x4"].summary     # per-truck figures
    result.trucks["Diesel 6x4"].trace       # the time series (pandas DataFrame)
"""
from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("tco")
except PackageNotFoundError:  # running from a source tree without installation
    __version__ = "0.1.0"


def __getattr__(name):
    # Lazy imports keep `tco --version` and `tco --help` fast.
    if name in ("load_scenario", "parse_scenario"):
        from tco import scenario

        return getattr(scenario, name)
    if name == "evaluate":
        from tco.pipeline import evaluate

        return evaluate
    if name == "demo_path":
        from tco.resources import demo_path

        return demo_path
    raise AttributeError(name)
