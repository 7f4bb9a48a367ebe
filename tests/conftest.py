"""Shared test configuration: headless plotting, quiet dask."""
import os

os.environ.setdefault("MPLBACKEND", "Agg")
