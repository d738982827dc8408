"""trueturn: dynamic balancing of small rotating machines with a low-cost kit."""

__version__ = "0.1.0"
