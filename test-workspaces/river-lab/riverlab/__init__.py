"""riverlab: stochastic models of the river-monitoring lab (invented data)."""

__version__ = "0.3.0"
