"""IONEX 1.0 ionosphere maps -> :class:`IonexMaps` (Schaer et al. 1998, "IONEX:
The IONosphere Map EXchange Format Version 1").

Only the text is read here; interpolation, the single-layer mapping and the
slant delay are models in :mod:`ctt.atmosphere` (the two convenience methods
of :class:`IonexMaps` call them).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import ProductFormatError

@dataclass(frozen=True)
class IonexMaps:
    """Vertical TEC maps of an IONEX file (2-D maps only).

    ``tec_tecu``: ``(n_map, n_lat, n_lon)`` TEC units (NaN where the file has
    9999); ``rms_tecu`` the same shape or ``None``; ``lat_deg`` ascending or
    descending as in the file; ``epochs_ns`` int64 (the file's epochs, GPS
    time is assumed: IONEX 1.0 epochs are UT, which differs from GPS by the
    leap seconds, 18 s in 2021 — a 0.3 % shift of the hourly interpolation
    weight, far below the maps' accuracy; see ``time_scale``).
    """

    path: str
    epochs_ns: np.ndarray
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    tec_tecu: np.ndarray
    rms_tecu: np.ndarray | None
    height_m: float  #: shell height HGT1
    base_radius_m: float
    mapping_function: str
    elevation_cutoff_deg: float
    time_scale: str = "UTC"

    def vtec_tecu(self, t_ns, lat_rad, lon_rad, *, rotate=True, rms=False):
        """:func:`ionex_vtec_tecu` on these maps."""
        from ..atmosphere import ionex_vtec_tecu

        return ionex_vtec_tecu(self, t_ns, lat_rad, lon_rad, rotate=rotate, rms=rms)

    def slant_delay_m(self, t_ns, lat_rad, lon_rad, az_rad, el_rad, f_hz, *, rotate=True):
        """Slant group delay in metres only (:func:`ionex_slant_delay_m` without the STEC)."""
        from ..atmosphere import ionex_slant_delay_m

        return ionex_slant_delay_m(self, t_ns, lat_rad, lon_rad, az_rad, el_rad, f_hz, rotate=rotate)[0]


def _f(line, a, b, path, lineno, what):
    try:
        v = float(line[a:b])
    except ValueError:
        raise ProductFormatError(path, lineno, what, line) from None
    if not np.isfinite(v):   # 'nan'/'inf' parse as floats but are no IONEX value
        raise ProductFormatError(path, lineno, what, line)
    return v


def _i(line, a, b, path, lineno, what):
    try:
        return int(line[a:b])
    except ValueError:
        raise ProductFormatError(path, lineno, what, line) from None


def _epoch6(line, path, lineno):
    from .. import timescales as ts

    v = [_i(line, 6 * k, 6 * k + 6, path, lineno, "an epoch as 6I6 (year month day hour min sec)") for k in range(6)]
    return int(ts.civil_to_ns(*v))


def read_ionex(path, *, time_scale="UTC") -> IonexMaps:
    """Read an IONEX 1.0 file: header, TEC maps, optional RMS maps.

    Handles the header's and each map's ``EXPONENT`` records, values 9999
    (no value), ``16I5`` data lines per latitude band, ``START/END OF AUX
    DATA`` blocks (skipped). Height maps and 3-D maps (MAP DIMENSION 3) are
    rejected with a :class:`~ctt.errors.ProductFormatError`. ``time_scale``
    names the scale of the file's epochs (IONEX 1.0: UT, taken as UTC); the
    epochs are stored converted to GPS time.
    """
    try:
        return _read_ionex(path, time_scale=time_scale)
    except (ValueError, OverflowError, IndexError, MemoryError) as e:
        if isinstance(e, ProductFormatError):
            raise
        # header counts or grid values that parse but describe no possible grid (negative or
        # huge sizes): no single line is to blame, so the file is named with the reason
        raise ProductFormatError(path, None, "a consistent IONEX header (grid sizes, number of maps)",
                                 f"{type(e).__name__}: {e}") from None


def _read_ionex(path, *, time_scale="UTC") -> IonexMaps:
    import pathlib

    from .. import timescales as ts
    from .compression import read_text

    path = pathlib.Path(path)
    lines = read_text(path).splitlines()
    if not lines or lines[0][60:80].strip() != "IONEX VERSION / TYPE":
        raise ProductFormatError(path, 1, "'IONEX VERSION / TYPE' in columns 61-80",
                                 lines[0] if lines else "an empty file")
    if lines[0][20:21] != "I":
        raise ProductFormatError(path, 1, "file type 'I' in column 21", lines[0])
    hdr = {}
    exponent = -1
    n_maps = None
    end = None
    i = 1
    while i < len(lines):
        line = lines[i]
        lineno = i + 1
        label = line[60:80].strip()
        if label == "START OF AUX DATA":
            while i < len(lines) and lines[i][60:80].strip() != "END OF AUX DATA":
                i += 1
        elif label == "HGT1 / HGT2 / DHGT":
            hdr["hgt"] = tuple(_f(line, 2 + 6 * k, 8 + 6 * k, path, lineno, "HGT1/HGT2/DHGT as 2X,3F6.1") for k in range(3))
        elif label == "LAT1 / LAT2 / DLAT":
            hdr["lat"] = tuple(_f(line, 2 + 6 * k, 8 + 6 * k, path, lineno, "LAT1/LAT2/DLAT as 2X,3F6.1") for k in range(3))
        elif label == "LON1 / LON2 / DLON":
            hdr["lon"] = tuple(_f(line, 2 + 6 * k, 8 + 6 * k, path, lineno, "LON1/LON2/DLON as 2X,3F6.1") for k in range(3))
        elif label == "EXPONENT":
            exponent = _i(line, 0, 6, path, lineno, "EXPONENT as I6")
        elif label == "BASE RADIUS":
            hdr["radius"] = _f(line, 0, 8, path, lineno, "BASE RADIUS as F8.1 (km)")
        elif label == "MAP DIMENSION":
            if _i(line, 0, 6, path, lineno, "MAP DIMENSION as I6") != 2:
                raise ProductFormatError(path, lineno, "2-dimensional maps (MAP DIMENSION 2)", line)
        elif label == "# OF MAPS IN FILE":
            n_maps = _i(line, 0, 6, path, lineno, "# OF MAPS IN FILE as I6")
        elif label == "MAPPING FUNCTION":
            hdr["mapping"] = line[2:6].strip()
        elif label == "ELEVATION CUTOFF":
            hdr["cutoff"] = _f(line, 0, 8, path, lineno, "ELEVATION CUTOFF as F8.1")
        elif label == "END OF HEADER":
            end = i
            break
        i += 1
    if end is None:
        raise ProductFormatError(path, len(lines), "'END OF HEADER'", "end of file")
    for key, label in (("hgt", "HGT1 / HGT2 / DHGT"), ("lat", "LAT1 / LAT2 / DLAT"),
                       ("lon", "LON1 / LON2 / DLON"), ("radius", "BASE RADIUS")):
        if key not in hdr:
            raise ProductFormatError(path, end + 1, f"a '{label}' header record", "none before END OF HEADER")
    lat1, lat2, dlat = hdr["lat"]
    lon1, lon2, dlon = hdr["lon"]
    if dlat == 0 or dlon == 0:
        raise ProductFormatError(path, end + 1, "non-zero DLAT and DLON", f"{dlat}, {dlon}")
    n_lat = int(round((lat2 - lat1) / dlat)) + 1
    n_lon = int(round((lon2 - lon1) / dlon)) + 1
    lat_grid = lat1 + dlat * np.arange(n_lat)
    lon_grid = lon1 + dlon * np.arange(n_lon)
    rows_per_band = (n_lon + 15) // 16

    maps = {"TEC": {}, "RMS": {}}
    i = end + 1
    while i < len(lines):
        line = lines[i]
        label = line[60:80].strip()
        if label in ("START OF TEC MAP", "START OF RMS MAP", "START OF HEIGHT MAP"):
            kind = label.split()[2]
            if kind == "HEIGHT":
                raise ProductFormatError(path, i + 1, "TEC or RMS maps (height maps are not supported)", line)
            idx = _i(line, 0, 6, path, i + 1, "the map index as I6")
            stop = f"END OF {kind} MAP"
            grid = np.full((n_lat, n_lon), np.nan)
            epoch = None
            exp_map = exponent
            band = 0
            i += 1
            while i < len(lines) and lines[i][60:80].strip() != stop:
                line = lines[i]
                lab = line[60:80].strip()
                if lab == "EPOCH OF CURRENT MAP":
                    epoch = _epoch6(line, path, i + 1)
                elif lab == "EXPONENT":
                    exp_map = _i(line, 0, 6, path, i + 1, "EXPONENT as I6")
                elif lab == "LAT/LON1/LON2/DLON/H":
                    lat = _f(line, 2, 8, path, i + 1, "LAT as 2X,F6.1")
                    j = int(round((lat - lat1) / dlat))
                    if not 0 <= j < n_lat or abs(lat_grid[j] - lat) > 1e-6:
                        raise ProductFormatError(path, i + 1, f"a latitude of the grid {lat1}..{lat2} step {dlat}", line)
                    data = lines[i + 1:i + 1 + rows_per_band]
                    if len(data) < rows_per_band:
                        raise ProductFormatError(path, len(lines), f"{rows_per_band} data line(s) of 16I5", "end of file")
                    text = "".join(d[:80].ljust(80) for d in data)
                    chars = np.frombuffer(text.encode("latin-1"), dtype=np.uint8).reshape(-1, 5)[:n_lon]
                    fields = np.char.strip(np.ascontiguousarray(chars).view("S5").ravel())
                    if np.any(fields == b""):
                        raise ProductFormatError(path, i + 2, f"{n_lon} values as 16I5 per latitude band",
                                                 data[0])
                    try:
                        vals = fields.astype(np.int64)
                    except ValueError:
                        raise ProductFormatError(path, i + 2, "integer values as 16I5", data[0]) from None
                    row = vals.astype(float) * 10.0 ** exp_map
                    row[vals == 9999] = np.nan
                    grid[j] = row
                    band += 1
                    i += rows_per_band
                i += 1
            if i >= len(lines):
                raise ProductFormatError(path, len(lines), f"'{stop}'", "end of file")
            if epoch is None:
                raise ProductFormatError(path, i + 1, "an 'EPOCH OF CURRENT MAP' record in the map", lines[i])
            if band != n_lat:
                raise ProductFormatError(path, i + 1, f"{n_lat} latitude bands in the map", f"{band}")
            maps[kind][idx] = (epoch, grid)
        elif label == "END OF FILE":
            break
        i += 1
    if not maps["TEC"]:
        raise ProductFormatError(path, None, "at least one TEC map", "none")
    order = sorted(maps["TEC"])
    if n_maps is not None and len(order) != n_maps:
        raise ProductFormatError(path, None, f"{n_maps} TEC maps ('# OF MAPS IN FILE')", f"{len(order)}")
    epochs = np.array([maps["TEC"][k][0] for k in order], dtype=np.int64)
    tec = np.stack([maps["TEC"][k][1] for k in order])
    rms = None
    if maps["RMS"]:
        rms = np.stack([maps["RMS"][k][1] if k in maps["RMS"] else np.full((n_lat, n_lon), np.nan) for k in order])
    scale = ts.normalise_scale(time_scale)
    try:
        epochs_gps = epochs if scale == "GPS" else ts.convert(epochs, scale, "GPS")
    except ts.TimeScaleError as e:   # a damaged year (e.g. before 1972 in UTC)
        raise ProductFormatError(path, None, "map epochs the time scales can convert", str(e)) from None
    if np.any(np.diff(epochs_gps) <= 0):
        raise ProductFormatError(path, None, "map epochs in increasing order", epochs.tolist())
    return IonexMaps(path=str(path), epochs_ns=np.asarray(epochs_gps, dtype=np.int64), lat_deg=lat_grid,
                     lon_deg=lon_grid, tec_tecu=tec, rms_tecu=rms, height_m=hdr["hgt"][0] * 1e3,
                     base_radius_m=hdr["radius"] * 1e3, mapping_function=hdr.get("mapping", "NONE"),
                     elevation_cutoff_deg=hdr.get("cutoff", 0.0), time_scale=scale)
