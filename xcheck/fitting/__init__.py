"""Fitting candidates to an observation: observations, fit, statistics, candidates, identifiability, rank."""
