"""driftband.variants."""
