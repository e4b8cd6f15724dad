"""Differential checks: build original and rewritten code, run both, compare bits.

The helpers here drive a real compiler (``gfortran``) so that claims such as
"this edit is bit-for-bit" can be checked against something outside the
rewriting core.  See :mod:`rewrite.verify.gfortran`.
"""
