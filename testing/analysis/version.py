"""Version of the computation core.

Stored results carry this string so every number says which algorithm produced it. Bump the
minor part when a result can change for the same inputs, the major part when a field changes
meaning, the patch part for fixes that cannot change any stored number.
"""

from __future__ import annotations

# 1.1: envelopes flag close normal stresses and uneven dry densities
# 1.2: stage results store U (k = 2) of τ at failure; envelopes store a characteristic line
# 1.3: U (k = 2) of σn at failure from the apparatus's mass, lever and box tolerances; U(τ)
#      includes the box tolerance when one is recorded
ANALYSIS_VERSION = "1.3.0"

__all__ = ["ANALYSIS_VERSION"]
