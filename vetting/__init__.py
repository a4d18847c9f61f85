"""vetting: choose off-the-shelf employment tests for a job, on published evidence, and defend the choice."""

__version__ = "0.1.0"
