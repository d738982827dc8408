"""Balancing engine: pure math (numpy/scipy in, dataclasses out); see README.md here."""

from trueturn.balance.readings import BalanceInput, parse_readings
from trueturn.balance.solve import SolveReport, solve

__all__ = ["BalanceInput", "SolveReport", "parse_readings", "solve"]
