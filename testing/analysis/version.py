"""Version of the computation core.

Stored results carry this string so every number says which algorithm produced it. Bump the
minor part when a result can change for the same inputs, the major part when a field changes
meaning, the patch part for fixes that cannot change any stored number.
"""

from __future__ import annotations

ANALYSIS_VERSION = "1.1.0"  # 1.1: envelopes flag close normal stresses and uneven dry densities

__all__ = ["ANALYSIS_VERSION"]
