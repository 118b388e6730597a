"""probwrap: calibrated probabilities, least-expected-cost decisions and base-rate shift."""

__version__ = "0.1.0"
