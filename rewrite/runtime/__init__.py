"""Run-time support for rewritten code.

``fortran/samebits_runtime.f90`` is the Fortran module that rewritten sources ``use``
(``sb_power``); ``powers.py`` is its bit-exact Python reference and error bound.
Rewritten Python imports ``exact_sum``, ``exact_mean`` and ``exact_reduce`` from here.
"""

# Lazy exports: ``import rewrite.runtime`` must not import numpy (the CLI imports this
# package to find data files, and numpy is not a CLI dependency).
_LAZY = {"exact_sum": "sums", "exact_dot": "sums", "SumAccumulator": "sums", "exact_mean": "means",
         "exact_reduce": "means"}

__all__ = list(_LAZY)


def __getattr__(name):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    from importlib import import_module

    value = getattr(import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
