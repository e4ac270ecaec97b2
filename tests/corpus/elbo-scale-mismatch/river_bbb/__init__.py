"""Bayes-by-backprop forecaster of river stage from upstream rainfall (invented gauges)."""
