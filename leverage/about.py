"""What every output says about the package: its version and the caution on its designs."""

__version__ = "0.1.0"

CAUTION = (
    "Preliminary patched-conic design. Before any flight use, verify it with "
    "high-fidelity tools, flyby-safety and planetary-protection analysis, and "
    "licensed practice."
)
