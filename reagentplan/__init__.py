"""reagentplan: scrubber reagent and byproduct logistics planning.

Forecasts of generation and coal quality drive a mass balance of limestone use and
gypsum / fly-ash / bottom-ash production; the scheduler plans deliveries and haul-outs
around it.  This is a planning aid: permits, local codes and licensed engineers decide.
"""

__version__ = "0.1.0"

CAUTION = (
    "Planning aid only. Check stock levels physically before acting; the station's "
    "permits, local codes and licensed engineers decide on emissions, storage, haul "
    "roads and landfill use."
)


def _source_checkout_folders() -> None:
    """Run from a source checkout, the dashboard and the demo are the top-level folders
    ``dashboard/`` and ``demo/`` beside this package; an install maps them to
    ``reagentplan.dashboard`` and ``reagentplan.demo`` (pyproject.toml,
    ``[tool.setuptools.package-dir]``).  Here the checkout's root is searched for this
    package's subpackages as well, so the same names import from those folders without
    an install (and from this checkout's folders, not another install's)."""
    import os

    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    if (os.path.isfile(os.path.join(root, "pyproject.toml"))
            and os.path.isfile(os.path.join(root, "dashboard", "__init__.py"))):
        __path__.append(root)  # noqa: F821 - the package's own search path


_source_checkout_folders()
