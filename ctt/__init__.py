"""ctt: GNSS common-view time transfer between two distant sites.

The package turns the daily RINEX observation files of two stations into the
series *clock A minus clock B* (nanoseconds) with uncertainties, stability
and drift diagnostics. See README.md for the job and DEVELOPERS.md for the
layout and conventions.
"""

__version__ = "0.1.0"
