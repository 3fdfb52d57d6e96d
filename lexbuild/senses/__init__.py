"""Sense induction: occurrence vectors, clustering, senses per verb, evaluation, calibration."""
