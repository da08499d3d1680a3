"""ctt.report and the report/stability/compare-periods commands.

External checks: the HTML is opened in headless Chromium (skipped when absent) and
the screenshot must not be blank; every <img> must be a data: URI holding a valid
PNG (PNG signature and IHDR chunk, ISO/IEC 15948 — common practice to check).
"""

import base64
import importlib.util
import json
import pathlib
import re
import shutil
import struct
import subprocess
import tempfile

import matplotlib.image as mpimg
import numpy as np
import pandas as pd
import pytest

from ctt import report
from ctt.cli import main
from ctt.errors import FileFormatError

HERE = pathlib.Path(__file__).parent
DATA = HERE / "data" / "stability"
_spec = importlib.util.spec_from_file_location("synth_run", DATA / "synth_run.py")
synth = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(synth)

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("run")
    info = synth.write_run(d, days=3.0, step_s=300.0)
    return d, info


@pytest.fixture(scope="module")
def built(run_dir, tmp_path_factory):
    d, info = run_dir
    out = tmp_path_factory.mktemp("rep") / "report.html"
    assert main(["report", str(d), "--out", str(out)]) == 0
    return out


def png_ok(data: bytes) -> bool:
    # PNG signature then an IHDR chunk with positive width and height (PNG spec)
    if data[:8] != PNG_MAGIC or data[12:16] != b"IHDR":
        return False
    w, h = struct.unpack(">II", data[16:24])
    return w > 0 and h > 0


# ------------------------------------------------------------------ reading

def test_read_series_offset_csv(run_dir):
    d, _ = run_dir
    s = report.read_series(d / "offset.csv")
    assert s.n_flagged == 6 and s.flagged == {"few satellites": 6}
    assert len(s.time_ns) == 864 - 6 and np.all(np.diff(s.time_ns) > 0)
    assert s.u_ns is not None and s.n_sat is not None


def test_read_plain_mjd_series():
    s = report.read_series(DATA / "plain_mjd.csv", column="value")
    assert len(s.value) == 10
    # 5 min spacing from MJD steps of 1/288 day, snapped to the millisecond
    assert np.all(np.diff(s.time_ns) == 300_000_000_000)


def test_bad_value_names_file_and_line():
    with pytest.raises(FileFormatError) as e:
        report.read_series(DATA / "bad_value.csv")
    assert e.value.line == 5 and "bad_value.csv" in str(e.value) and "n/a" in str(e.value)


def test_bad_time_names_line():
    with pytest.raises(FileFormatError) as e:
        report.read_series(DATA / "bad_time.csv")
    assert e.value.line == 4 and "ISO 8601" in str(e.value)


def test_missing_column_is_clear(tmp_path):
    p = tmp_path / "x.csv"
    p.write_text("time_utc,offset\n2026-01-01T00:00:00Z,1\n")
    with pytest.raises(FileFormatError, match="offset_ns"):
        report.read_series(p)
    p.write_text("when,offset_ns\n1,2\n")
    with pytest.raises(FileFormatError, match="time column"):
        report.read_series(p)


def test_day_folders_are_concatenated(tmp_path):
    for k, name in enumerate(("2026-03-01", "2026-03-02")):
        synth.write_run(tmp_path / name, days=1.0, step_s=300.0, draw=20 + k, with_sats=False)
    # second day shifted by a day: rewrite its times
    f = pd.read_csv(tmp_path / "2026-03-02" / "offset.csv")
    f["time_utc"] = (pd.to_datetime(f["time_utc"]) + pd.Timedelta(days=1)).dt.strftime("%Y-%m-%dT%H:%M:%SZ")
    f["mjd_utc"] += 1
    f.to_csv(tmp_path / "2026-03-02" / "offset.csv", index=False)
    r = report.read_run_dir(tmp_path)
    assert len(r.offsets) == 2 * 288 and len(r.sources) == 2
    out = tmp_path / "r.html"
    rep = report.build_report(r.offsets, summary=r.summary, out_html=out,
                              time_from_ns=report.day_range_ns("2026-03-02", None)[0])
    assert rep["series"]["start"] == "2026-03-02T00:00:00Z"
    assert json.loads(out.with_suffix(".json").read_text())["series"]["n_samples"] == rep["series"]["n_samples"]


# ------------------------------------------------------------------ report content

def test_report_is_self_contained(built):
    doc = built.read_text()
    assert "<script" not in doc.lower()
    # no network references: no http(s) URLs in src/href, no @import
    assert not re.search(r'(src|href)\s*=\s*"(https?:)?//', doc)
    assert "@import" not in doc
    imgs = re.findall(r'<img [^>]*src="([^"]+)"', doc)
    assert len(imgs) >= 6
    for src in imgs:
        assert src.startswith("data:image/png;base64,")
        assert png_ok(base64.b64decode(src.split(",", 1)[1]))


def test_report_json_numbers(built, run_dir):
    _, info = run_dir
    r = json.loads(built.with_suffix(".json").read_text())
    assert r["budget"]["total_ns"] == 2.14
    assert r["provenance"]["inputs"][0]["sha256"]
    steps = [c for c in r["changes"] if c["kind"] == "phase step"]
    # the invented 5 ns step, found within 4 u of its size (local fit, ctt.stability)
    assert len(steps) == 1 and abs(steps[0]["size"] - info["step_ns"]) < 4 * steps[0]["u_size"]
    # the invented series (tests/data/stability/synth_run.py): white PM σx = 1.2 ns and white
    # FM with 0.05 ns phase steps per τ0 = 300 s. SP 1065 noise table: white PM σy(τ) = √3·σx/τ,
    # white FM σy²(τ) = q²/(τ0·τ); at τ = 1 h: 5.774e-13 and 4.81e-14, root sum 5.794e-13 (the
    # invented drift adds 6e-16). Within two half-widths of the 1σ CI (SP 1065 §5.3).
    a = r["stability_at"]["1 h"]["adev"]
    truth = np.hypot(np.sqrt(3) * 1.2e-9 / 3600, np.sqrt((0.05e-9) ** 2 / (300 * 3600)))
    assert a["tau_s"] == 3600.0 and a["noise"] == "white PM"
    assert abs(a["dev"] - truth) < 2 * (a["ci_high"] - a["ci_low"]) / 2
    # 3 d span: 1 d > span/3, so the nearest computed τ within an octave is used and named
    # (octave τ of the series' τ0; the largest ≤ span/3)
    one_d = r["stability_at"]["1 d"]
    assert one_d["tau_s"] == one_d["adev"]["tau_s"] and 43200 <= one_d["tau_s"] < 86400
    assert one_d["tau_s"] <= r["series"]["span_s"] / 3
    assert r["drift"]["drift_per_day"]["u"] > 0
    doc = built.read_text()
    assert f"TDEV {r['stability_at']['1 h']['tdev_ns']['dev']:.3g} ns" in doc    # same number in both


def test_report_with_change_log(run_dir, tmp_path):
    d, info = run_dir
    rd = report.read_run_dir(d)
    log = [{"time_utc_ns": info["step_time_ns"] + 300 * 10**9, "what": "cable swap", "expected_ns": 5.0}]
    r = report.build_report(rd.offsets, None, rd.summary, log, tmp_path / "x.html")
    step = [c for c in r["changes"] if c["kind"] == "phase step"][0]
    assert step["expected"] and step["what"] == "cable swap"


@pytest.mark.skipif(shutil.which("chromium") is None and shutil.which("chromium-browser") is None,
                    reason="chromium not installed")
def test_report_renders_in_headless_chromium(built, tmp_path):
    exe = shutil.which("chromium") or shutil.which("chromium-browser")
    shot = tmp_path / "shot.png"
    with tempfile.TemporaryDirectory() as prof:
        subprocess.run([exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                        "--disable-component-update", "--disable-sync", "--no-first-run",
                        f"--user-data-dir={prof}", f"--screenshot={shot}", "--window-size=1200,3000",
                        built.resolve().as_uri()], check=True, timeout=120, capture_output=True)
    assert png_ok(shot.read_bytes())
    img = mpimg.imread(shot)[..., :3].mean(axis=2)
    # not blank: dark ink (text, axes) on many rows, and images in the lower part too
    assert (img < 0.4).any(axis=1).mean() > 0.2
    assert img[1500:].std() > 0.05


# ------------------------------------------------------------------ commands

def test_stability_command_json(run_dir, capsys, tmp_path):
    d, _ = run_dir
    assert main(["stability", str(d / "offset.csv"), "--json", "--out", str(tmp_path)]) == 0
    out = json.loads(capsys.readouterr().out)
    for k in ("adev", "mdev", "tdev", "hdev"):
        assert {"tau_s", "dev", "ci_low", "ci_high", "edf", "noise", "n"} <= set(out[k][0])
    assert out["units"]["tdev"] == "ns"
    assert {"value", "u"} <= set(out["drift"]["frequency"])
    assert all({"time_utc", "kind", "size", "u_size", "expected"} <= set(c) for c in out["changes"])
    assert (tmp_path / "stability.png").is_file() and (tmp_path / "stability.svg").is_file()


def test_plain_series_command_text(capsys):
    assert main(["stability", str(DATA / "plain_mjd.csv"), "--column", "value"]) == 0
    out = capsys.readouterr().out
    assert "tau0 300 s, 10 samples" in out and "\n300 " in out


def test_compare_periods_command(run_dir, capsys):
    d, _ = run_dir
    assert main(["compare-periods", str(d / "offset.csv"), "--before", "2026-03-01..2026-03-02T11:59",
                 "--after", "2026-03-02T12:00..2026-03-03", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["significant"] and out["delta_mean_ns"]["u"] > 0
    assert main(["compare-periods", str(d / "offset.csv"), "--before", "2026-03-01",
                 "--after", "2026-03-02..2026-03-03"]) == 2


def test_bad_file_exit_code(capsys):
    assert main(["stability", str(DATA / "bad_value.csv")]) == 1
    assert "bad_value.csv:5" in capsys.readouterr().err


def test_report_from_archive(run_dir, tmp_path, capsys):
    import ctt.archive as archive
    d, _ = run_dir
    off = pd.read_csv(d / "offset.csv")
    db = tmp_path / "a.sqlite"
    with archive.Archive(db) as ar:
        for day, rows in off.groupby(off["time_utc"].str[:10]):
            ar.store_day("alpha-bravo", day, rows, None,
                         {"inputs": {"obs_a": {"path": f"alpha_{day}.rnx", "sha256": "ab" * 32}},
                          "version": "0.0-test"})
    out = tmp_path / "arch.html"
    assert main(["report", str(db), "--pair", "alpha-bravo", "--from", "2026-03-02", "--out", str(out)]) == 0
    r = json.loads(out.with_suffix(".json").read_text())
    assert r["series"]["start"] == "2026-03-02T00:00:00Z" and r["provenance"]["days"] == 2
    assert r["provenance"]["inputs"][0]["sha256"] == "ab" * 32
    # one pair in the archive: no --pair needed, the same report; the command says where it wrote
    capsys.readouterr()
    assert main(["report", str(db), "--from", "2026-03-02", "--out", str(out)]) == 0
    assert f"wrote {out} and {out.with_suffix('.json')}" in capsys.readouterr().out
    assert json.loads(out.with_suffix(".json").read_text())["series"] == r["series"]
    with archive.Archive(db) as ar:                                   # a second pair: --pair needed
        ar.store_day("charlie-delta", "2026-03-02", off.iloc[:10], None, {"inputs": {}})
    assert main(["report", str(db), "--out", str(out)]) == 2
    assert "alpha-bravo, charlie-delta" in capsys.readouterr().err


def test_too_short_duplicate_and_off_grid_series(tmp_path, capsys):
    p = tmp_path / "short.csv"
    p.write_text("mjd,value\n61100.0,1\n61100.1,2\n61100.2,1.5\n")
    assert main(["stability", str(p), "--column", "value"]) == 3          # missing input / no data
    assert "at least 8" in capsys.readouterr().err
    rows = [f"{61100 + 0.1 * k:.1f},{k % 3}" for k in range(9)]
    p.write_text("mjd,value\n" + "\n".join(rows + [rows[4]]) + "\n")
    assert main(["stability", str(p), "--column", "value"]) == 1
    assert "each instant once" in capsys.readouterr().err
    p.write_text("mjd,value\n" + "\n".join(rows + ["61100.87,1"]) + "\n")
    assert main(["stability", str(p), "--column", "value", "--json"]) == 0
    g = json.loads(capsys.readouterr().out)["grid"]
    assert g["n_snapped"] == 1 and g["max_shift_s"] == pytest.approx(0.03 * 86400, abs=1)


def test_series_from_frame_keeps_each_days_main_series():
    """A table of several days where one day was processed with GPS only and the others with
    G+E (series G, E and ALL): each day contributes its main series (ctt.commonview.main_series:
    'ALL' where a day has it, else its one system), so the GPS-only day is not dropped (it was,
    when 'ALL' was picked for the whole table). Invented rows."""
    from ctt.report import series_from_frame

    from ctt.timescales import parse_iso

    t0, day = parse_iso("2021-01-01T00:00:00Z"), 86_400 * 10**9
    rows = []
    for d, systems in ((0, ("G", "E", "ALL")), (1, ("G",)), (2, ("G", "E", "ALL"))):
        for k in range(3):
            for s in systems:
                rows.append({"time_utc_ns": t0 + d * day + k * 960 * 10**9, "system": s,
                             "offset_ns": {"G": 1.0, "E": 2.0, "ALL": 1.5}[s] + d, "u_ns": 0.5, "flag": "ok"})
    s = series_from_frame(pd.DataFrame(rows))
    assert len(s.value) == 9                                   # 3 points on each of the 3 days
    np.testing.assert_allclose(s.value, [1.5] * 3 + [2.0] * 3 + [3.5] * 3)   # ALL, G (day 1), ALL
