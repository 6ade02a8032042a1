"""Uncertainty: the GUM budget (JCGM 100), the Monte Carlo method (JCGM 101), one coverage-factor
rule and the decision rules (ILAC-G8).  Generic: knows nothing of drag.
"""
