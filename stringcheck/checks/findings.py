"""Findings of the checks and studies: the base module ``stringcheck.findings``, under the name
the check layer has always used (the design layer's assumptions are findings too, hence the home
below every layer)."""

from stringcheck.findings import Finding, Value, codes

__all__ = ["Finding", "Value", "codes"]
