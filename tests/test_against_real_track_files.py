"""Track files against the observation files they came from, on two real pairs (2021-01-01).

Each station is written with ``ctt tracks`` (CGGTTS 2E) and the two files are
paired with ``ctt pair --tracks-a --tracks-b`` and no navigation file; the same
pair from the RINEX files with the broadcast ephemeris is the reference.
ZIMM-CN00 (IGS/UNAVCO, about 6,900 km, a few common satellites) and DELF-WSRA
(about 180 km, the regional case; DELF's receiver clock drifts by -0.735 us/s
and resets by 1 ms every 22.5 minutes).

Bounds (issue 14): the file route keeps at least 95 % of the RINEX route's
'ok' points and, on points 'ok' in both, agrees within 0.15 ns. Expected from
error propagation: REFSYS is written in 0.1 ns (CGGTTS 2E unit), so each track
value moves by at most 0.05 ns at each station and a satellite difference by
at most 0.1 ns; a weighted mean of such differences by at most 0.1 ns, unless
the rounding tips a rejection decision. The receiver line (RCVR) comes from
the RINEX header's REC # / TYPE / VERS (RINEX 2.11 format document, header
records), REV DATE from the station file.
"""

import numpy as np
import pandas as pd
import pytest

from ctt.cli import main
from ctt.formats.cggtts import read_cggtts

PAIRS = {
    "ZIMM-CN00": ("zimm0010.21o.gz", "cn000010.21o.gz", "zimm", "cn00", "TRIMBLE NETR9 SN 5429R49141"),
    "DELF-WSRA": ("delf0010.21d", "wsra0010.21d", "delf", "wsra", "TPS ODYSSEY_E SN 323-0386"),
}


@pytest.mark.slow
@pytest.mark.parametrize("name", sorted(PAIRS))
def test_two_track_files_give_the_rinex_route(name, shared_data, test_data, tmp_path, capsys):
    obs_a, obs_b, sa, sb, rcvr_a = PAIRS[name]
    d = shared_data
    st = {k: str(test_data / "stations" / f"{k}.toml") for k in (sa, sb)}
    nav = str(d / "brdc0010.21n")
    files = {}
    for obs, s in ((obs_a, sa), (obs_b, sb)):
        files[s] = tmp_path / f"{s.upper()}59215.cggtts"
        assert main(["tracks", str(d / obs), "--nav", nav, "--station", st[s], "--out", str(files[s])]) == 0
    assert main(["pair", "--obs-a", str(d / obs_a), "--obs-b", str(d / obs_b), "--nav", nav,
                 "--station-a", st[sa], "--station-b", st[sb], "--out", str(tmp_path / "rinex")]) == 0
    # no --nav: two track files carry everything the pair needs
    assert main(["pair", "--tracks-a", str(files[sa]), "--tracks-b", str(files[sb]),
                 "--station-a", st[sa], "--station-b", st[sb], "--out", str(tmp_path / "files")]) == 0
    capsys.readouterr()
    x = pd.read_csv(tmp_path / "rinex" / "offset.csv").set_index("time_gps_ns")
    y = pd.read_csv(tmp_path / "files" / "offset.csv").set_index("time_gps_ns")
    n_x, n_y = int((x["flag"] == "ok").sum()), int((y["flag"] == "ok").sum())
    both = x.index[(x["flag"] == "ok")].intersection(y.index[(y["flag"] == "ok")])
    diff = (x.loc[both, "offset_ns"] - y.loc[both, "offset_ns"]).to_numpy()
    with capsys.disabled():
        print(f"\n{name}: RINEX route {n_x} ok of {len(x)}, track files {n_y} ok of {len(y)} "
              f"({100 * n_y / n_x:.1f} %); {len(both)} in both, |diff| max {np.max(np.abs(diff)):.3f} ns, "
              f"RMS {np.sqrt(np.mean(diff ** 2)):.3f} ns")
    assert n_x >= 80                   # the RINEX route itself holds (89 tracks in the day)
    assert n_y >= 0.95 * n_x           # issue 14 bound
    assert len(both) >= 0.95 * n_x
    assert np.max(np.abs(diff)) <= 0.15  # issue 14 bound (0.1 ns expected, see the docstring)
    hdr, _ = read_cggtts(files[sa])
    assert hdr.rcvr.startswith(rcvr_a)   # RINEX header REC # / TYPE / VERS
    assert hdr.rev_date == "2020-01-01"  # the station file's delay set valid_from
