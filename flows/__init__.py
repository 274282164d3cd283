"""Example pipelines around the gate: a nightly Prefect flow, a plain CI step, a Dask fan-out.

Run them as scripts (``python flows/nightly_forecast.py --help``); tests import them as the
package ``flows``.
"""
