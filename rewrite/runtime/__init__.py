"""Run-time support for rewritten code.

``fortran/samebits_runtime.f90`` is the Fortran module that rewritten sources ``use``
(``sb_power``); ``powers.py`` is its bit-exact Python reference and error bound.
"""
