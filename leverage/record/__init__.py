"""The design record: one decision vector as quantities with units, margins and event states; sampled arcs."""
