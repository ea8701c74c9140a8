"""leverage: global search for v-infinity leveraging trajectories.

Preliminary patched-conic designs only: verify any result with high-fidelity tools,
flyby-safety and planetary-protection review, and licensed practice before flight use.
"""
__version__ = "0.1.0"

CAUTION = (
    "Preliminary patched-conic design. Before any flight use, verify it with "
    "high-fidelity tools, flyby-safety and planetary-protection analysis, and "
    "licensed practice."
)
