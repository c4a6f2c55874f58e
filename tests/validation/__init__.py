"""Statistical validation of the dynamics against exact and published results.

These tests hold the engine to exact enumerations, exact finite- and infinite-lattice
formulas and Glauber's exact chain dynamics; every check names its published source.
Exact values are computed here (``_exact.py``) from the published formulas and
cross-checked against the numbers printed in ``shared/REFERENCE.md``, which are stored with
their provenance in ``tests/data/*.csv``.
"""
