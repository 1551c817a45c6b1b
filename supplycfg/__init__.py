"""supplycfg: set up a DC generator for a battery, an arc or a lighting bus.

The core is a set of pure functions over numpy arrays; only ``app.py`` and
``supplycfg.page`` touch Streamlit.
"""

__version__ = "0.1.0"

STANDING_NOTICE = (
    "The figures are estimates for planning. Follow local codes, the "
    "manufacturers' instructions and licensed practice; they come first."
)
