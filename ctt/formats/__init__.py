"""Every external file format ctt reads or writes, one module per format.

Each module turns text into the project's documented data structures (or
back) and nothing else; the physics that uses them lives in the model
modules (:mod:`ctt.orbits`, :mod:`ctt.atmosphere`, :mod:`ctt.signals`, ...).

=====================  =================================================
module                 format
=====================  =================================================
``compression``        opening plain, gzip, .Z, bz2, zip and Hatanaka files as text
``rinex_obs``          RINEX 2.xx-4.xx observation files (reader)
``rinex_nav``          RINEX 2.xx-4.xx broadcast navigation files (reader)
``rinex_met``          RINEX meteorological files (reader)
``rinex_writers``      RINEX observation, navigation and met writers (the simulator's)
``sp3``                SP3-c/d precise orbits and clocks
``rinex_clock``        RINEX clock files (satellite and station clocks)
``antex``              ANTEX antenna phase-centre offsets and variations (satellites and receivers)
``ionex``              IONEX ionosphere maps
``bias_sinex``         Bias-SINEX code biases (and ``read_code_biases``: either kind of bias file)
``dcb``                classic monthly DCB files (P1-C1, P1-P2) as Bias-SINEX DSB entries
``sinex``              SINEX station coordinates, velocities, antennas, eccentricities
``erp``                IGS Earth rotation parameter files (pole coordinates)
``cggtts``             CGGTTS 2E common-view track files (reader and writer)
=====================  =================================================
"""
