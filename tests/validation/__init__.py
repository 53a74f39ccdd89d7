"""Validation of the dating chain on populations with a known recharge history.

Everything in this package is independent of the code under test: the forward
model (:mod:`tests.validation.physics`) re-types the published laws from their
sources and integrates the diffusion equation with its own finite-volume
scheme; nothing here imports zoneprofile's solver, fitting, laws or partition
code. :mod:`tests.validation.population` writes a campaign and its truth,
:mod:`tests.validation.score` compares a campaign's results with the truth.
See docs/validation.md.
"""
