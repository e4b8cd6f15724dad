"""samebits: rewrite floating-point arithmetic so that it gives the same bits on every build.

The package is one straight road: a front end (``fortran/``) turns source text into sites
(expression trees with exact spans and types, ``ir.py``); the planner (``planner/``) turns sites
into edits (``edits.py``); the report room (``report/``) prints them as check lines, unified diffs
or JSON. ``api.py`` is the single entry point used by the command line and the tests.
"""

__version__ = "0.1.0"
