"""driftband.prf."""
