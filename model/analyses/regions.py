"""The names of the regions a transistor's operating point is classed in,
as the figures and the ledger write them; a leaf module, so that reading a
design file needs no engine (the thresholds are in transfer.py)."""

ACTIVE, SATURATION, CUTOFF = "active", "saturation", "cutoff"
REGIONS = (ACTIVE, SATURATION, CUTOFF)
