"""Fortran front end: free-form source text to sites (see frontend.py)."""
