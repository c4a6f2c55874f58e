"""Tests of the measurement layer, coarsen.observables."""
