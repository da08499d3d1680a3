"""ctt.formats.rinex_nav.read_nav against georinex (an independent RINEX reader) as reference.

Each numeric field must be *equal* to georinex.load's value: both read the
same printed decimal and convert it to the nearest float64, so any difference
is a parsing error (wrong column, wrong exponent, dropped digit).
"""

from __future__ import annotations

import numpy as np
import pytest

from ctt.formats.rinex_nav import read_nav
from ctt.timescales import from_datetime64

gr = pytest.importorskip("georinex")

# georinex variable -> ctt column, GPS LNAV (RINEX 2.11 / 3 GPS layout)
GPS_MAP = {
    "SVclockBias": "af0_s", "SVclockDrift": "af1_sps", "SVclockDriftRate": "af2_sps2", "IODE": "iode",
    "Crs": "crs_m", "DeltaN": "delta_n_radps", "M0": "m0_rad", "Cuc": "cuc_rad", "Eccentricity": "e",
    "Cus": "cus_rad", "sqrtA": "sqrt_a_sqrtm", "Toe": "toe_sow_s", "Cic": "cic_rad", "Omega0": "omega0_rad",
    "Cis": "cis_rad", "Io": "i0_rad", "Crc": "crc_m", "omega": "omega_rad", "OmegaDot": "omega_dot_radps",
    "IDOT": "idot_radps", "CodesL2": "l2_codes", "GPSWeek": "week", "L2Pflag": "l2p_flag", "SVacc": "ura_m",
    "health": "health", "TGD": "tgd_s", "IODC": "iodc", "TransTime": "ttm_sow_s", "FitIntvl": "fit_raw",
}


def _compare(ds, df, mapping, toc_col="toc_ns"):
    """Every non-NaN georinex cell (time, sv) has a ctt record with equal values."""
    t_ns = from_datetime64(ds.time.values)
    ours = df.set_index(["sat", toc_col])
    n_cells = 0
    for var, col in mapping.items():
        arr = ds[var].values  # (time, sv)
        ti, si = np.nonzero(np.isfinite(arr))
        keys = list(zip(ds.sv.values[si].astype(str), t_ns[ti]))
        mine = ours.loc[keys, col].to_numpy(dtype=np.float64)
        ref = arr[ti, si]
        # exact equality: same decimal text -> same float64 (see module docstring)
        np.testing.assert_array_equal(mine, ref, err_msg=f"{var} vs {col}")
        n_cells += len(ti)
    return n_cells


def test_brdc_gps_v211_equals_georinex(shared_data):
    path = shared_data / "brdc0010.21n"
    ds = gr.load(path)
    nav = read_nav(path)
    df = nav.records["G"]
    # same record count: georinex keeps one cell per (epoch, satellite), the file has no duplicates
    n_ref = int(np.isfinite(ds["sqrtA"].values).sum())
    assert len(df) == n_ref
    assert _compare(ds, df, GPS_MAP) == n_ref * len(GPS_MAP)
    # header Klobuchar coefficients (georinex: ionospheric_corr_GPS = alpha + beta)
    ref = np.asarray(ds.attrs["ionospheric_corr_GPS"])
    np.testing.assert_array_equal(np.concatenate([nav.header.iono["GPSA"], nav.header.iono["GPSB"]]), ref)


# georinex RINEX 3 variable names per system -> ctt columns
GAL_MAP = {
    "SVclockBias": "af0_s", "SVclockDrift": "af1_sps", "SVclockDriftRate": "af2_sps2", "IODnav": "iode",
    "Crs": "crs_m", "DeltaN": "delta_n_radps", "M0": "m0_rad", "Cuc": "cuc_rad", "Eccentricity": "e",
    "Cus": "cus_rad", "sqrtA": "sqrt_a_sqrtm", "Toe": "toe_sow_s", "Cic": "cic_rad", "Omega0": "omega0_rad",
    "Cis": "cis_rad", "Io": "i0_rad", "Crc": "crc_m", "omega": "omega_rad", "OmegaDot": "omega_dot_radps",
    "IDOT": "idot_radps", "DataSrc": "data_source", "GALWeek": "week", "SISA": "ura_m", "health": "health",
    "BGDe5a": "bgd_e5a_s", "BGDe5b": "bgd_e5b_s", "TransTime": "ttm_sow_s",
}
BDS_MAP = {
    "SVclockBias": "af0_s", "SVclockDrift": "af1_sps", "SVclockDriftRate": "af2_sps2", "AODE": "iode",
    "Crs": "crs_m", "DeltaN": "delta_n_radps", "M0": "m0_rad", "Cuc": "cuc_rad", "Eccentricity": "e",
    "Cus": "cus_rad", "sqrtA": "sqrt_a_sqrtm", "Toe": "toe_sow_s", "Cic": "cic_rad", "Omega0": "omega0_rad",
    "Cis": "cis_rad", "Io": "i0_rad", "Crc": "crc_m", "omega": "omega_rad", "OmegaDot": "omega_dot_radps",
    "IDOT": "idot_radps", "BDTWeek": "week", "SVacc": "ura_m", "SatH1": "health", "TGD1": "tgd1_s",
    "TGD2": "tgd2_s", "TransTime": "ttm_sow_s", "AODC": "aodc",
}
GLO_MAP = {
    "SVclockBias": "minus_tau_n_s", "SVrelFreqBias": "gamma_n", "MessageFrameTime": "tk_s",
    "X": "x_m", "dX": "vx_mps", "dX2": "ax_mps2", "health": "health",
    "Y": "y_m", "dY": "vy_mps", "dY2": "ay_mps2", "FreqNum": "freq_num",
    "Z": "z_m", "dZ": "vz_mps", "dZ2": "az_mps2", "AgeOpInfo": "age_days",
}
QZS_MAP = {k: v for k, v in GPS_MAP.items() if k not in ("FitIntvl",)}


@pytest.mark.filterwarnings("ignore::FutureWarning")
def test_mixed_v304_equals_georinex(test_data):
    path = test_data / "nav" / "mixed_v304.rnx"
    ds = gr.load(path)
    nav = read_nav(path)
    assert nav.dropped == [] and nav.skipped == {}
    # georinex names a second record of one satellite at the same epoch 'E24_1': compare each copy
    # with the ctt record of the same data source
    n = 0
    for sv in ds.sv.values.astype(str):
        sub = ds.sel(sv=[sv]).dropna("time", how="all")
        sys_ = sv[0]
        df = nav.records[sys_]
        if sys_ == "E":
            src = int(np.nanmax(sub["DataSrc"].values))
            df = df[df.data_source == src]
            sub = sub.assign_coords(sv=[sv[:3]])
        mapping = {"G": GPS_MAP, "E": GAL_MAP, "C": BDS_MAP, "R": GLO_MAP, "J": QZS_MAP}[sys_]
        mapping = {k: v for k, v in mapping.items() if k in sub}
        # GLONASS states: both readers convert km to m by the same multiplication by 1000
        n += _compare(sub, df, mapping)
    assert n > 200  # 11 records, every field compared
    # header ionospheric coefficients (georinex attrs)
    h = nav.header.iono
    np.testing.assert_array_equal(np.concatenate([h["GPSA"], h["GPSB"]]), ds.attrs["ionospheric_corr_GPS"])
    np.testing.assert_array_equal(h["GAL"], ds.attrs["ionospheric_corr_GAL"])
    np.testing.assert_array_equal(np.concatenate([h["BDSA"], h["BDSB"]]), ds.attrs["ionospheric_corr_BDS"])
