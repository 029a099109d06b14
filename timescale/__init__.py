"""timescale: compare analog pulse time-scaling architectures on the same pulse."""
