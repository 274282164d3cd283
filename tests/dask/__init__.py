"""Tests of the dask engine."""
