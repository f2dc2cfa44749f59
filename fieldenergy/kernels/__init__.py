"""Numerical kernels: numba, arrays in and arrays out; nothing here knows of cases or files."""
