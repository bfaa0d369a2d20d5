"""Tests of the particle pipeline."""
