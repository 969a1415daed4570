"""Fitting layer: lmfit models, data-driven starting values, the automatic fit."""
