"""Findings of the checks and studies: :class:`~stringcheck.findings.Finding` and its
:class:`~stringcheck.findings.Value`, defined in the base layer (``stringcheck.findings``) so that
the Monte Carlo layer below the checks (the importance sampler's estimator and notes, the mixed
stock) says what it found the same way."""

from stringcheck.findings import Finding, Value, codes

__all__ = ["Finding", "Value", "codes"]
