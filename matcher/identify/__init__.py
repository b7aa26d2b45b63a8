"""Identification: window search, hints, evidence, the unlisted-peak model, the joint assignment,
the run model and adaptive correction, the ranked shortlist and its flags, query, screen and evaluate.

Works on in-memory objects (peak tables, calibrations, the library snapshot) only.
"""
