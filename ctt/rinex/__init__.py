"""Readers for the RINEX family of open formats (observation, navigation, meteorological, products)."""
