"""Jobs: the only place that combines stages (reads an out directory, samples, then plans)."""
