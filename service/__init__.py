"""cycleledger: fatigue damage and life from measured load histories."""

__version__ = "0.1.0"
