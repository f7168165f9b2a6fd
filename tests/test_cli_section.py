"""The `reachgauge section` command: real figures, clean errors, exit codes."""

import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from reachgauge import CrossSection
from reachgauge.cli.entry import main

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data" / "gauged_section.csv"


def run(args, capsys):
    code = main([str(a) for a in args])
    out, err = capsys.readouterr()
    return code, out, err


def write(tmp_path, text, name="p.csv"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_bundled_example_prints_figures_with_units(capsys):
    code, out, err = run(["section", SAMPLE, "--stage", 100.9, "--slope", 0.0021, "--n", 0.035], capsys)
    assert code == 0, err
    assert "discharge" in out and "m³/s" in out and "m²" in out
    assert "Screening estimates only" in out


def test_rectangle_from_csv_matches_ponce_example(tmp_path, capsys):
    # Ponce, CIVE 530, Fall 2008 [read]: b = 6 m, y = 1.6 m, n = 0.015, S = 0.0025 → Q = 32.91 m³/s
    p = write(tmp_path, "offset,elevation\n0,5\n0.000001,0\n6,0\n6.000001,5\n")
    code, out, _ = run(["section", p, "--depth", 1.6, "--slope", 0.0025, "--n", 0.015], capsys)
    assert code == 0
    line = next(l for l in out.splitlines() if l.startswith("discharge"))
    assert float(line.split()[1]) == pytest.approx(32.91, rel=1e-3)


def test_back_calculation_and_rating_table(tmp_path, capsys):
    out_csv = tmp_path / "rating.csv"
    code, out, _ = run(["section", SAMPLE, "--stage", 100.9, "--slope", 0.0021, "--discharge", 6.2,
                        "--rating", out_csv], capsys)
    assert code == 0
    assert "back-calculated" in out and "Chow (1959) Table 5-6" in out
    table = pd.read_csv(out_csv)
    # the lumped section dips where water spreads onto the right bench; the
    # command must say so and name the remedy
    assert not table["discharge"].is_monotonic_increasing and "divided-channel" in out
    assert table["depth"].iloc[0] == 0
    # rating uses the back-calculated n, so the measured point lies on the curve
    n_line = next(l for l in out.splitlines() if l.startswith("Manning's n"))
    n = float(n_line.split()[2])
    df = pd.read_csv(SAMPLE, comment="#")
    cs = CrossSection(df.offset, df.elevation)
    assert cs.discharge(100.9, 0.0021, n) == pytest.approx(6.2, rel=5e-4)  # n printed to 4 digits
    # an existing rating file is not overwritten without --overwrite
    before = out_csv.read_bytes()
    code, _, err = run(["section", SAMPLE, "--stage", 100.5, "--slope", 0.0021, "--n", 0.04,
                        "--rating", out_csv], capsys)
    assert code == 2 and "already exists" in err and out_csv.read_bytes() == before


def test_depth_profile(tmp_path, capsys):
    # depths below a measured water surface at 10.0: a triangle 4 m wide, 1 m deep
    p = write(tmp_path, "offset,depth\n0,0\n2,1\n4,0\n")
    code, out, _ = run(["section", p, "--stage", 10.0, "--slope", 0.001, "--n", 0.03], capsys)
    assert code == 0
    area = float(next(l for l in out.splitlines() if l.startswith("area")).split()[1])
    assert area == pytest.approx(2.0)  # closed form: triangle 4 × 1 / 2


def test_us_units_label(tmp_path, capsys):
    p = write(tmp_path, "# units: us\noffset,elevation\n0,5\n10,0\n20,0\n30,5\n")  # a file states its units
    code, out, _ = run(["section", p, "--depth", 2, "--slope", 0.001, "--n", 0.03, "--units", "us"],
                       capsys)
    assert code == 0 and "ft³/s" in out


@pytest.mark.parametrize("text,msg", [
    ("a,b\n1,2\n", "needs an offset column"),
    ("offset,elevation\n0,1\n1,x\n2,1\n", "line 3"),
    ("offset,elevation\n0,1\n1,0\n", "at least 3 points"),
    ("offset,elevation\n0,1\n2,0\n1,1\n", "increase strictly"),
    ("", "cannot read"),
    ("offset,elevation,depth\n0,1,0\n1,0,1\n2,1,0\n", "both an elevation and a depth"),
])
def test_bad_csvs_give_one_clean_error(tmp_path, capsys, text, msg):
    p = write(tmp_path, text)
    code, out, err = run(["section", p, "--depth", 0.5, "--slope", 0.001, "--n", 0.03], capsys)
    assert code == 2
    assert err.startswith("error: ") and msg in err and err.count("\n") == 1
    assert "Traceback" not in err


@pytest.mark.parametrize("extra,msg", [
    (["--slope", "-0.01", "--n", "0.03", "--depth", "1"], "slope must be"),
    (["--slope", "0.01", "--n", "0", "--depth", "1"], "greater than 0"),
    (["--slope", "0.01", "--n", "0.3", "--depth", "1"], "outside 0.01–0.25"),
    (["--slope", "0.01", "--n", "0.03"], "water level is missing"),
    (["--slope", "0.01", "--n", "0.03", "--depth", "1", "--units", "metric"], "invalid choice"),
    (["--slope", "0.01", "--n", "0.03", "0.04", "--depth", "1"], "one or three"),
])
def test_bad_options_give_one_clean_error(capsys, extra, msg):
    code, _, err = run(["section", SAMPLE, *extra], capsys)
    assert code == 2 and msg in err and err.startswith("error: ")


def test_console_script_exit_code_and_help():
    exe = Path(sys.executable).with_name("reachgauge")
    r = subprocess.run([str(exe), "section", "--help"], capture_output=True, text=True)
    assert r.returncode == 0 and "examples:" in r.stdout and "licensed" in r.stdout
    r = subprocess.run([str(exe), "section", "missing.csv", "--depth", "1", "--slope", "0.01",
                        "--n", "0.03"], capture_output=True, text=True)
    assert r.returncode == 2 and r.stderr.startswith("error: ")


def test_banks_split(capsys):
    code, out, _ = run(["section", SAMPLE, "--stage", 101.7, "--slope", 0.0021, "--n", 0.06, 0.035,
                        0.06, "--banks", 6.5, 18], capsys)
    assert code == 0 and "left overbank" in out and "note: the water reaches an end" not in out
    # divided-channel method (Chow 1959, §6-9): the parts' discharges add up to the total
    total = float(next(l for l in out.splitlines() if l.startswith("discharge")).split()[1])
    parts = [float(l.split("discharge ")[1].split()[0]) for l in out.splitlines()
             if l.startswith("  ") and "discharge" in l]
    assert len(parts) == 3 and sum(parts) == pytest.approx(total, rel=2e-3)
    assert np.isfinite(float(next(l for l in out.splitlines() if l.startswith("discharge")).split()[1]))


def test_divided_channel_rating_is_monotone(tmp_path, capsys):
    out_csv = tmp_path / "r.csv"
    code, out, _ = run(["section", SAMPLE, "--stage", 100.9, "--slope", 0.0021, "--n", 0.05, 0.035,
                        0.05, "--banks", 6.5, 15.5, "--rating", out_csv], capsys)
    assert code == 0 and "rating dips" not in out
    assert pd.read_csv(out_csv)["discharge"].is_monotonic_increasing


def test_back_calculated_n_with_banks_reproduces_the_measured_discharge(capsys):
    # one conveyance model for n and figures (divided channel, Chow 1959, §6-9):
    # the printed discharge must be the measured one (it printed 54.5 for 40 before)
    code, out, _ = run(["section", SAMPLE, "--stage", 101.7, "--slope", 0.0021, "--discharge", 40,
                        "--banks", 6.5, 15.5], capsys)
    assert code == 0
    line = next(l for l in out.splitlines() if l.startswith("discharge "))
    assert float(line.split()[1]) == pytest.approx(40.0, rel=1e-3)
    parts = [l for l in out.splitlines() if l.strip().startswith(("left overbank", "channel",
                                                                    "right overbank"))]
    assert sum(float(l.rsplit("discharge", 1)[1].split()[0]) for l in parts) == \
        pytest.approx(40.0, rel=1e-3)
