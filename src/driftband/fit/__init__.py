"""driftband.fit."""
