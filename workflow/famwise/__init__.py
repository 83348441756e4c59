"""famwise: corrected group statistics for EEG time-frequency data."""

__version__ = "0.1.0"
