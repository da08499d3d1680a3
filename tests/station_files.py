"""Station files for the tests on real IGS stations (one template for every such test).

The stations' delays are not calibrated: zero delays with placeholder uncertainties, so
only results in which the delays cancel or do not enter (a clock against the IGS
station clocks about its mean, a position) may be checked with them.
"""

from __future__ import annotations

IGS_STATION_TOML = """[station]
id = "{id}"
name = "{id}, IGS station (real open data)"
elevation_mask_deg = {mask}
[station.position]
x_m = {x}
y_m = {y}
z_m = {z}
sigma_m = {sigma}
frame = "{frame}"
epoch = {epoch}
is_marker = true
[station.antenna]
type = "{antenna}"
delta_h_m = {dh}
delta_e_m = 0.0
delta_n_m = 0.0
[[delays]]
valid_from = 2010-01-01T00:00:00Z
receiver_ns = {{ C1C = 0.0, C1W = 0.0, C2W = 0.0 }}
u_receiver_ns = 5.0
cable_ns = 0.0
u_cable_ns = 1.0
reference_ns = 0.0
u_reference_ns = 1.0
note = "not calibrated: zero delays, uncertainties are placeholders"
"""


def igs_station_toml(sid, xyz, antenna, dh, *, sigma=1.0, frame="RINEX header approximate position",
                     epoch=2011.8, mask=7.0) -> str:
    """Text of a station file for IGS station ``sid`` at ``xyz`` (marker, metres)."""
    x, y, z = (float(v) for v in xyz)
    return IGS_STATION_TOML.format(id=sid, x=x, y=y, z=z, sigma=sigma, frame=frame, epoch=epoch, mask=mask,
                                   antenna=antenna, dh=dh)
