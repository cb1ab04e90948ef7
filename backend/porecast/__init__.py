"""Porecast: burial-aware scenario modelling and seismic facies classification."""

__version__ = "0.1.0"
