"""cablekit: design cable-driven parallel robots in notebooks.

SI units inside (m, kg, N, N*m, rad, s); units as text at the edges (design files, widgets,
the review sheet).  See DEVELOPERS.md for the architecture map and conventions.
"""

__version__ = "0.1.0"

from .design import Design, DesignError, load_design, save_design  # noqa: E402,F401
