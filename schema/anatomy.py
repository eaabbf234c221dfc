"""Facts about compartments that several layers need (common practice, no source)."""

from __future__ import annotations

# Organs whose venous blood drains into the liver through the portal vein: a total hepatic flow
# already carries their flows.
PORTAL_ORGANS = frozenset({"gut", "spleen", "pancreas", "stomach", "small_intestine", "large_intestine"})

# Fluid compartments whose volume is its own quantity rather than a mass over a density.
FLUID_VOLUME = {"blood": "blood_volume", "plasma": "plasma_volume"}
