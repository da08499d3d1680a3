"""Offset tables, exact event-time parsing and event-time correction."""

from __future__ import annotations

import io
import json
import math

import numpy as np
import pandas as pd
import pytest

from ctt import exports as X
from ctt.errors import FileFormatError, NoDataError, UsageError
from ctt.timescales import parse_iso

T0 = parse_iso("2021-01-01T00:00:00Z")
S = 1_000_000_000


def offsets(n=10, step_s=30, slope_ns_per_s=0.01, start=T0):
    t = start + np.arange(n, dtype=np.int64) * step_s * S
    return pd.DataFrame({"time_utc_ns": t, "offset_ns": 100.0 + slope_ns_per_s * (t - start) / S,
                         "u_ns": np.full(n, 0.4), "n_sat": np.full(n, 7), "flag": "ok"})


# ---------------------------------------------------------------- offset tables

@pytest.mark.parametrize("fmt", ["csv", "parquet", "json"])
def test_write_offsets_round_trip(tmp_path, fmt):
    df = offsets()
    df.loc[3, "offset_ns"] = 1 / 3          # rounded to 0.001 ns, as offset.csv and the archive
    df.loc[4, "u_ns"] = np.nan
    p = tmp_path / f"o.{fmt}"
    X.write_offsets(df, p, format=fmt)
    if fmt == "csv":
        back = pd.read_csv(p)                # no options without metadata (the documented promise)
    elif fmt == "parquet":
        back = pd.read_parquet(p)
    else:
        back = pd.DataFrame(json.loads(p.read_text()))
    assert list(back.columns) == ["time_utc", "time_utc_ns", "mjd_utc", "offset_ns", "u_ns", "n_sat", "flag"]
    assert back["time_utc"].iloc[1] == "2021-01-01T00:00:30Z"
    np.testing.assert_array_equal(back["time_utc_ns"].to_numpy(np.int64), df["time_utc_ns"].to_numpy())
    np.testing.assert_array_equal(back["offset_ns"].to_numpy(float), np.round(df["offset_ns"].to_numpy(), 3))
    assert back["offset_ns"].iloc[3] == 0.333
    assert np.isnan(back["u_ns"].iloc[4])
    assert back["mjd_utc"].iloc[0] == 59215.0   # MJD of 2021-01-01 (common practice)
    assert (back["flag"] == "ok").all() and (back["n_sat"] == 7).all()


@pytest.mark.parametrize("fmt", ["csv", "parquet", "json"])
def test_write_offsets_metadata(tmp_path, fmt):
    """Each format carries the pair, the sign, units and the time scale (issue 12 item 8)."""
    df = offsets(n=4)
    meta = X.offsets_metadata("laba-labb", "LABA", "LABB", date_from="2021-01-01")
    p = tmp_path / f"o.{fmt}"
    X.write_offsets(df, p, format=fmt, metadata=meta)
    if fmt == "csv":
        head = [ln for ln in p.read_text().splitlines() if ln.startswith("#")]
        assert "# pair: laba-labb" in head and any("clock LABA - clock LABB" in ln for ln in head)
        back = pd.read_csv(p, comment="#")   # the documented way to read it
        got = meta
    elif fmt == "parquet":
        import pyarrow.parquet as pq

        got = json.loads(pq.read_schema(p).metadata[b"ctt"])
        back = pd.read_parquet(p)
    else:
        doc = json.loads(p.read_text())
        got, back = doc["metadata"], pd.DataFrame(doc["rows"])
    assert got["pair"] == "laba-labb" and got["units"]["offset_ns"] == "ns"
    assert "1980-01-06" in got["time_scale"] and got["sign"].startswith("offset_ns = clock A - clock B")
    assert len(back) == 4 and list(back["offset_ns"]) == list(np.round(df["offset_ns"], 3))


def test_write_offsets_sub_second_and_stdout(capsysbinary):
    df = offsets(n=2)
    df.loc[1, "time_utc_ns"] += 123
    X.write_offsets(df, None, "csv")
    out = capsysbinary.readouterr().out.decode()
    assert "2021-01-01T00:00:30.000000123Z" in out and "2021-01-01T00:00:00.000000000Z" in out
    with pytest.raises(UsageError):
        X.write_offsets(df, None, "xlsx")


def test_write_offsets_keeps_system(tmp_path):
    df = offsets(n=3).assign(system="ALL")
    X.write_offsets(df, tmp_path / "o.csv")
    assert list(pd.read_csv(tmp_path / "o.csv")["system"]) == ["ALL"] * 3


# ---------------------------------------------------------------- exact parsing

def test_parse_iso_exact_is_exact():
    s = ["2021-01-01T00:00:00.123456789Z", "2021-01-01T00:00:00.1Z", "2021-06-30 23:59:60", "2040-12-31T23:59:59.999999999"]
    got = X.parse_iso_exact(s)
    assert got[0] - T0 == 123_456_789
    assert got[1] - T0 == 100_000_000
    assert got[3] == parse_iso("2040-12-31T23:59:59.999999999")
    # float seconds since 1980 would lose this: 1.3e18 ns has a float spacing of 256 ns
    assert float(got[0]) % 1 == 0 and int(float(got[0])) != got[0]
    with pytest.raises(ValueError) as ei:
        X.parse_iso_exact(["2021-01-01T00:00:00Z", "2021-13-01T00:00:00Z"])
    assert ei.value.index == 1


def test_parse_mjd_exact():
    # 59215.5 = 2021-01-01T12:00:00 UTC (MJD 59215 is 2021-01-01; common practice)
    got = X.parse_mjd_exact(["59215.5", "59215", "59215.00000000001157407407"])
    assert got[0] == parse_iso("2021-01-01T12:00:00Z") and got[1] == T0
    assert got[2] - T0 == 1000  # 1.157407407e-11 day x 86400e9 ns/day = 1000.0000 ns


def test_read_events_names_the_line(tmp_path):
    p = tmp_path / "ev.csv"
    p.write_text("time_utc,id\n2021-01-01T00:00:10.5Z,a\n2021-01-01T25:00:00Z,b\n")
    with pytest.raises(FileFormatError) as ei:
        X.read_events(p)
    assert ei.value.line == 3 and "ev.csv:3" in str(ei.value) and "ISO 8601" in str(ei.value)
    p.write_text("when,id\n1,a\n")
    with pytest.raises(FileFormatError, match="time_utc or mjd_utc"):
        X.read_events(p)
    p.write_text("time_utc,id\n2021-01-01T00:00:10.000000001Z,007\n")
    ev = X.read_events(p)
    assert ev["event_time_utc_ns"].iloc[0] == T0 + 10 * S + 1 and ev["id"].iloc[0] == "007"  # carried as text


# ---------------------------------------------------------------- event correction

def test_sign_convention_b_to_a_and_back():
    off = offsets()                       # A - B = 100 ns + 0.01 ns/s
    ev = pd.DataFrame({"time_utc": ["2021-01-01T00:01:00.000000000Z", "2021-01-01T00:01:15Z"], "tag": ["x", "y"]})
    r = X.correct_events(ev, off, site="B", max_gap_s=100)
    # timestamp on B's clock = t + clock_B; on A's: t + clock_A = t_B + (A - B)
    assert list(r["status"]) == ["ok", "ok"] and list(r["tag"]) == ["x", "y"]
    assert r["offset_ns"].iloc[0] == pytest.approx(100.6, abs=1e-9)
    assert r["offset_ns"].iloc[1] == pytest.approx(100.75, abs=1e-9)   # linear in between
    assert r["corrected_time_utc_ns"].iloc[0] == T0 + 60 * S + 101     # 100.6 ns rounds to 101
    assert r["corrected_time_utc"].iloc[0] == "2021-01-01T00:01:00.000000101Z"
    assert r["correction_ns"].iloc[0] == pytest.approx(100.6)
    assert r["target_site"].iloc[0] == "A"
    ra = X.correct_events(ev, off, site="A", max_gap_s=100)
    assert ra["correction_ns"].iloc[0] == pytest.approx(-100.6) and ra["target_site"].iloc[0] == "B"


def test_refusals_outside_span_and_in_gaps():
    off = offsets(n=10)
    off = off.drop(index=[4, 5, 6]).reset_index(drop=True)       # 120 s gap between 90 s and 210 s
    bad = offsets(n=10).iloc[[7]].assign(flag="high_scatter", time_utc_ns=T0 + 215 * S)
    off = pd.concat([off, bad], ignore_index=True)
    times = [T0 - 1, T0, T0 + 150 * S, T0 + 270 * S, T0 + 270 * S + 1, T0 + 100 * S]
    r = X.correct_events(pd.DataFrame({"event_time_utc_ns": times}), off, max_gap_s=60)
    assert list(r["status"]) == ["refused", "ok", "refused", "ok", "refused", "refused"]
    assert "before the first" in r["reason"].iloc[0] and "after the last" in r["reason"].iloc[4]
    assert "gap of 120 s" in r["reason"].iloc[2] and "max_gap_s = 60" in r["reason"].iloc[2]
    assert r["corrected_time_utc_ns"].isna().iloc[2] and np.isnan(r["u_ns"].iloc[2])
    # with a longer allowed gap the same event is interpolated
    r2 = X.correct_events(pd.DataFrame({"event_time_utc_ns": [T0 + 150 * S]}), off, max_gap_s=200)
    assert r2["status"].iloc[0] == "ok"


def test_uncertainty_combination_formula():
    off = offsets(n=5)
    off["u_ns"] = [0.3, 0.4, 0.5, 0.6, 0.7]
    tdev_table = (np.array([30.0, 60.0]), np.array([0.2, 0.2 * math.sqrt(2)]))
    ev = pd.DataFrame({"event_time_utc_ns": [T0 + 40 * S, T0 + 30 * S]})
    r = X.correct_events(ev, off, budget_type_b_ns=2.0, tdev=tdev_table, max_gap_s=100)
    w1 = 10 / 30
    u_pts = math.hypot((1 - w1) * 0.4, w1 * 0.5)
    u_int = math.sqrt(3) * 0.2 * math.sqrt(10 / 30)      # d = 10 s < tau0: white-FM scaling
    assert r["u_points_ns"].iloc[0] == pytest.approx(u_pts, rel=1e-12)
    assert r["u_interp_ns"].iloc[0] == pytest.approx(u_int, rel=1e-12)
    assert r["u_ns"].iloc[0] == pytest.approx(math.sqrt(u_pts ** 2 + u_int ** 2 + 4.0), rel=1e-12)
    assert r["u_interp_ns"].iloc[1] == 0.0 and r["u_points_ns"].iloc[1] == pytest.approx(0.4)  # on a point


def test_interpolation_uncertainty_against_random_walk():
    """White FM (random-walk phase): the predicted u_interp must cover the real interpolation error.

    Theory (module docstring): predicted variance D d, true Brownian-bridge variance
    D d (tau0 - d)/tau0, so rms(true)/rms(predicted) = sqrt(2/3) = 0.816 for events
    uniform in time; the TDEV estimate from 2000 points scatters by ~5 % (chi-square
    with several hundred EDF at tau0), hence the bounds 0.72..0.95.
    """
    rng = np.random.default_rng(3)
    d_ns2_per_s = 1e-4
    n = 200_000
    x = np.cumsum(rng.normal(0, math.sqrt(d_ns2_per_s), n))
    t = T0 + np.arange(n, dtype=np.int64) * S
    tau0 = 100
    off = pd.DataFrame({"time_utc_ns": t[::tau0], "offset_ns": x[::tau0], "u_ns": 0.0, "flag": "ok"})
    idx = rng.integers(0, n - tau0, 5000)
    r = X.correct_events(pd.DataFrame({"event_time_utc_ns": t[idx]}), off, max_gap_s=1e6)
    err = r["offset_ns"].to_numpy() - x[idx]
    u = r["u_interp_ns"].to_numpy()
    on = u > 0
    ratio = math.sqrt(np.mean(err[on] ** 2) / np.mean(u[on] ** 2))
    assert 0.72 < ratio < 0.95, ratio
    assert np.mean(np.abs(err[on]) > 2 * u[on]) < 0.046   # fewer than a normal's 4.6 % beyond 2 sigma


def test_tdev_from_series_against_white_fm_theory():
    # white FM, point samples: TDEV(tau0) = tau0 ADEV(tau0)/sqrt(3) = sqrt(D tau0 / 3) (NIST SP 1065 definitions)
    rng = np.random.default_rng(5)
    d = 1e-4
    x = np.cumsum(rng.normal(0, math.sqrt(d * 30), 20000))
    t = T0 + np.arange(20000, dtype=np.int64) * 30 * S
    taus, tdv, tau0 = X.tdev_from_series(t, x)
    assert tau0 == 30.0 and taus[0] == 30.0
    assert tdv[0] == pytest.approx(math.sqrt(d * 30 / 3), rel=0.05)   # ~1.3 % EDF scatter for 20000 points


def test_system_selection_and_flags():
    off = pd.concat([offsets().assign(system="G"), offsets().assign(system="ALL", offset_ns=5.0)])
    ev = pd.DataFrame({"event_time_utc_ns": [T0 + 45 * S]})
    assert X.correct_events(ev, off)["offset_ns"].iloc[0] == 5.0        # ALL preferred
    assert X.correct_events(ev, off, system="G")["offset_ns"].iloc[0] == pytest.approx(100.45)
    two = pd.concat([offsets().assign(system="G"), offsets().assign(system="E")])
    with pytest.raises(UsageError, match="choose one"):
        X.correct_events(ev, two)
    with pytest.raises(NoDataError):
        X.correct_events(ev, offsets().assign(flag="no_data"))


# ---------------------------------------------------------------- commands

@pytest.fixture()
def archived_pair(tmp_path):
    import shutil
    from ctt.archive import Archive
    cfg = __import__("pathlib").Path(__file__).parent / "data" / "config"
    for n in ("laba.toml", "labb.toml", "pair.toml"):
        shutil.copy(cfg / n, tmp_path / n)
    (tmp_path / "data").mkdir()
    with Archive(tmp_path / "out" / "ctt.sqlite") as a:
        for day, start in (("2021-01-01", T0), ("2021-01-02", T0 + 86400 * S)):
            a.store_day("laba-labb", day, offsets(n=2880, start=start), None, {"config_hash": "c"})
    return tmp_path


def test_export_command(archived_pair, capsysbinary):
    from ctt.cli import main
    pair = str(archived_pair / "pair.toml")
    assert main(["export", "--config", pair, "--from", "2021-01-02", "--to", "2021-01-02"]) == 0
    df = pd.read_csv(io.BytesIO(capsysbinary.readouterr().out), comment="#")  # the metadata block
    assert len(df) == 2880 and df["time_utc"].iloc[0] == "2021-01-02T00:00:00Z"
    out = archived_pair / "o.parquet"
    assert main(["export", "--config", pair, "--from", "2021-01-01", "--to", "2021-01-02", "--format", "parquet",
                 "--out", str(out)]) == 0
    assert len(pd.read_parquet(out)) == 5760
    assert main(["export", "--config", pair, "--from", "2021-02-01", "--to", "2021-02-02"]) == 3  # no data
    assert main(["export", "--config", pair, "--from", "2021-02-03", "--to", "2021-02-02"]) == 2  # bad range


def test_correct_events_command(archived_pair, capsys):
    from ctt.cli import main
    ev = archived_pair / "events.csv"
    ev.write_text("time_utc,run\n2021-01-01T12:00:15.000000001Z,1\n2021-01-03T00:00:00Z,2\n")
    outp = archived_pair / "corrected.csv"
    assert main(["correct-events", "--config", str(archived_pair / "pair.toml"), "--events", str(ev),
                 "--site", "B", "--out", str(outp), "--type-b-ns", "2.5"]) == 0
    r = pd.read_csv(outp, dtype={"corrected_time_utc": str})
    assert list(r["status"]) == ["ok", "refused"] and list(r["run"]) == [1, 2]
    # offsets(): 100 ns + 0.01 ns/s since 2021-01-01T00:00 of its own day
    assert r["offset_ns"].iloc[0] == pytest.approx(100 + 0.01 * 43215, abs=1e-6)
    assert r["corrected_time_utc"].iloc[0] == "2021-01-01T12:00:15.000000533Z"   # +532.15 ns, rounded
    assert r["u_ns"].iloc[0] >= 2.5
    # without --type-b-ns, the daily run folders' summary.json give it (the larger of the days)
    for day, ub in (("2021-01-01", 1.5), ("2021-01-02", 4.0)):
        d = archived_pair / "out" / "laba-labb" / day
        d.mkdir(parents=True)
        (d / "summary.json").write_text(json.dumps({"budget": {"type_b_ns": ub}}))
    assert main(["correct-events", "--config", str(archived_pair / "pair.toml"), "--events", str(ev),
                 "--site", "B", "--out", str(outp)]) == 0
    assert pd.read_csv(outp)["u_type_b_ns"].iloc[0] == 4.0
    # the site is required: a silent default could give the correction the wrong sign
    with pytest.raises(SystemExit) as e:
        main(["correct-events", "--config", str(archived_pair / "pair.toml"), "--events", str(ev),
              "--out", str(outp)])
    assert e.value.code == 2


def test_correct_events_from_run_dir_and_baseline(archived_pair, capsys):
    from ctt.cli import main
    run = archived_pair / "run"
    run.mkdir()
    X.write_offsets(offsets(n=100), run / "offset.csv")
    (run / "summary.json").write_text(json.dumps({"budget": {"type_b_ns": 3.0}}))
    ev = archived_pair / "events.csv"
    ev.write_text("mjd_utc\n59215.0001\n")
    assert main(["correct-events", "--config", str(archived_pair / "pair.toml"), "--events", str(ev),
                 "--from-dir", str(run), "--site", "A", "--baseline"]) == 0
    out = capsys.readouterr().out
    assert "chord" in out and "light time" in out
    # chord from the two ECEF positions (ARP of LABA: +0.1 m up); independent numpy check
    a = np.array([4034007.873, 502462.242, 4898445.157])
    b = np.array([4495078.798, 955458.494, 4408115.925])
    chord = np.linalg.norm(b - a)
    got = float(out.split("chord")[1].split("m")[0])
    assert got == pytest.approx(chord, abs=0.1)     # the 0.1 m ARP shift changes the chord by < 0.1 m
    assert f"{chord / 299_792_458.0 * 1e9:.1f}" in out
    r = pd.read_csv(io.StringIO(out[out.index("mjd_utc"):]))
    assert r["u_type_b_ns"].iloc[0] == 3.0 and r["target_site"].iloc[0] == "B"
    assert r["correction_ns"].iloc[0] == pytest.approx(-(100 + 0.01 * 8.64), abs=1e-6)
