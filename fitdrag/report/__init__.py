"""Reporting: figures, certificates and JSON; nothing here computes results."""
