"""ctt.atmosphere's Niell mapping functions against the published coefficient tables.

Source: A. E. Niell, "Global mapping functions for the atmosphere delay at radio
wavelengths", J. Geophys. Res. 101(B2), 3227-3246, 1996, Tables 3 (hydrostatic:
average, seasonal amplitude, height correction) and 4 (wet). The paper itself was not
reachable here; the values below were read from two independent reproductions found
with the project's search tool:

* hydrostatic table and height-correction coefficients: the textbook reproduction in
  Leick, Rapoport & Tatarnikov, *GPS Satellite Surveying* (4th ed.), Table 6.1
  (a page of the book as published online; its text layer has OCR slips such as
  "209152299" for 2.9152299 and "102465397" for 1.2465397, read here with the printed
  scale factors ·10³, ·10⁵);
* wet table: Table 1 ("Coefficients of the Niell wet mapping function") of an
  open-access journal article that reproduces it (Bentham Open, TOASCJ vol. 11).

The tables are pinned digit for digit; then the mapping function is evaluated in
this file from those literals (Marini continued fraction normalised at the zenith,
Niell 1996 eqs. 4-6) at points where each term matters (latitude between table
rows, a season away from its node, a height of 2 km, elevation 5°) and compared
with ctt's. Tolerance 1e-12: the same formula in double precision, different order.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from ctt import atmosphere as atm

LAT = [15.0, 30.0, 45.0, 60.0, 75.0]
# Niell (1996) Table 3 via Leick et al. Table 6.1: a·10³, b·10³, c·10³ (average)
H_AVG = [(1.2769934, 2.9153695, 62.610505), (1.2683230, 2.9152299, 62.837393),
         (1.2465397, 2.9288445, 63.721774), (1.2196049, 2.9022565, 63.824265),
         (1.2045996, 2.9024912, 64.258455)]
# seasonal amplitudes a_p·10⁵, b_p·10⁵, c_p·10⁵
H_AMP = [(0.0, 0.0, 0.0), (1.2709626, 2.1414979, 9.0128400), (2.6523662, 3.0160779, 4.3497037),
         (3.4000452, 7.2562722, 84.795348), (4.1202191, 11.723375, 170.37206)]
# height correction a_ht·10⁵, b_ht·10³, c_ht·10³
H_HT = (2.53, 5.49, 1.14)
# Niell (1996) Table 4 via the Bentham Open reproduction: wet a, b, c (as printed)
W = [(5.8021897e-4, 1.4275268e-3, 4.3472961e-2), (5.6794847e-4, 1.5138625e-3, 4.6729510e-2),
     (5.8118019e-4, 1.4572752e-3, 4.3908931e-2), (5.9727542e-4, 1.5007428e-3, 4.4626982e-2),
     (6.1641693e-4, 1.7599082e-3, 5.4736038e-2)]


def test_coefficient_tables_are_the_published_ones():
    # every digit of the published tables (sources in the module docstring); rel 1e-15
    # allows only the binary rounding of the decimal literals
    np.testing.assert_allclose(atm._NIELL_LAT_DEG, LAT, rtol=0)
    np.testing.assert_allclose(atm._NIELL_H_AVG, np.array(H_AVG) * 1e-3, rtol=1e-15)
    np.testing.assert_allclose(atm._NIELL_H_AMP, np.array(H_AMP) * 1e-5, rtol=1e-15)
    np.testing.assert_allclose(atm._NIELL_HT, (H_HT[0] * 1e-5, H_HT[1] * 1e-3, H_HT[2] * 1e-3), rtol=1e-15)
    np.testing.assert_allclose(atm._NIELL_W, W, rtol=1e-15)


def _marini(s, a, b, c):
    # Niell (1996) eq. 4 (Marini 1972 form normalised to 1 at the zenith, Herring 1992)
    return (1 + a / (1 + b / (1 + c))) / (s + a / (s + b / (s + c)))


def _niell_here(el_deg, lat_deg, h_m, doy):
    """Niell (1996) eqs. 4-6 from the literal tables of this file (northern hemisphere)."""
    x = min(max(abs(lat_deg), 15.0), 75.0)
    avg = [np.interp(x, LAT, [r[k] * 1e-3 for r in H_AVG]) for k in range(3)]
    amp = [np.interp(x, LAT, [r[k] * 1e-5 for r in H_AMP]) for k in range(3)]
    cs = math.cos(2 * math.pi * (doy - 28.0) / 365.25)  # eq. 5, DOY₀ = 28
    abc = [avg[k] - amp[k] * cs for k in range(3)]
    s = math.sin(math.radians(el_deg))
    ht = (H_HT[0] * 1e-5, H_HT[1] * 1e-3, H_HT[2] * 1e-3)
    mh = _marini(s, *abc) + (1 / s - _marini(s, *ht)) * h_m / 1000.0  # eq. 6
    wet = [np.interp(x, LAT, [r[k] for r in W]) for k in range(3)]
    return mh, _marini(s, *wet)


@pytest.mark.parametrize("el_deg,lat_deg,h_m,doy", [
    (5.0, 52.5, 2000.0, 210.0),   # between the 45° and 60° rows, summer, 2 km: every term
    (5.0, 45.0, 0.0, 28.0),       # on the 45° node at the seasonal extreme (c typo shows here)
    (7.0, 37.0, 500.0, 120.0),
    (15.0, 68.0, 1200.0, 300.0),
])
def test_mapping_values_from_the_published_tables(el_deg, lat_deg, h_m, doy):
    mh, mw = atm.niell_mapping(math.radians(el_deg), math.radians(lat_deg), h_m, doy)
    eh, ew = _niell_here(el_deg, lat_deg, h_m, doy)
    assert mh == pytest.approx(eh, abs=1e-12)
    assert mw == pytest.approx(ew, abs=1e-12)
    # sanity of scale (Niell 1996, Fig. 1: about 10 at 5°)
    assert 9.0 < _niell_here(5.0, 45.0, 0.0, 28.0)[0] < 11.0


def test_each_term_is_visible_at_5_degrees():
    # the test above would be blind to a term that changes nothing at its points: show
    # each term moves the 5° hydrostatic value by far more than its 1e-12 tolerance
    base = _niell_here(5.0, 52.5, 2000.0, 210.0)[0]
    assert abs(_niell_here(5.0, 52.5, 0.0, 210.0)[0] - base) > 1e-3       # height
    assert abs(_niell_here(5.0, 52.5, 2000.0, 28.0)[0] - base) > 1e-3     # season
    assert abs(_niell_here(5.0, 47.5, 2000.0, 210.0)[0] - base) > 1e-3    # latitude
