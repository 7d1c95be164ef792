"""planner: error-budget planning for surface-code memory experiments."""

__version__ = "0.1.0"
