"""The Python front end (libcst) and its spelling."""
