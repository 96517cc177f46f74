#!/usr/bin/python3
"""heft's FITS and ECSV tables against astropy, the reference reader.

Sources: the FITS standard 4.0 (binary tables, Sect. 7.3: TTYPE, TUNIT,
TNULL) and the ECSV specification 1.0 (astropy APE 6), with Debian's
python3-astropy as the reference reader and writer.

1. Tables heft writes (screen, rank, curve, predict, ingest) read back with
   astropy Table.read: the column names of the CSV output, units as astropy
   units, every value equal to the CSV output's to the last bit, the run
   metadata present.
2. FITS and ECSV written by astropy from the demo star table, read by heft
   screen, give the CSV path's output byte for byte; with the errors stored
   in arcsec they agree to 1e-12 relative (one unit conversion each way).
3. NaN and TNULL in an astropy-written FITS star table read as absent:
   bad_input:missing_<column>, the batch goes on (exit 4).
4. A unit heft does not know is an error naming the column (exit 2).

Usage: astropy_tables.py HEFT SOURCE_DIR WORK_DIR
"""
import csv
import math
import os
import shutil
import subprocess
import sys
import warnings

import numpy as np
from astropy import units as u
from astropy.io import fits
from astropy.table import MaskedColumn, Table

heft, src, work = sys.argv[1:4]
shutil.rmtree(work, ignore_errors=True)
os.makedirs(work)
stars = os.path.join(src, "demo", "survey", "stars.csv")
failures = []


def check(cond, what):
    if not cond:
        failures.append(what)
        print("FAILED:", what)


def run(*args, code=0):
    p = subprocess.run([heft, *args], capture_output=True, text=True)
    check(p.returncode == code, f"heft {' '.join(args)}: exit {p.returncode}, want {code}: {p.stderr.strip()[:300]}")
    return p


def read_csv(path):
    with open(path, newline="") as f:
        rows = [r for r in csv.reader(f)]
    meta = None
    if rows and rows[0] and rows[0][0].startswith("#"):
        meta = rows[0]
        rows = rows[1:]
    return rows[0], rows[1:], meta


def same_value(text, value):
    """A CSV field against an astropy cell: numbers to the bit, empty = masked/NaN."""
    if np.ma.is_masked(value):
        return text == ""
    if isinstance(value, (bytes, str, np.str_)):
        return str(value) == text
    v = float(value)
    if text == "":
        return math.isnan(v)
    return float(text) == v


def compare(csv_path, table_path, kind, units):
    header, rows, meta = read_csv(csv_path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # Mjup is not a FITS-standard unit (docs/formats.md)
        t = Table.read(table_path)
    check(t.colnames == header, f"{table_path}: columns {t.colnames[:5]}... differ from the CSV header")
    check(len(t) == len(rows), f"{table_path}: {len(t)} rows, CSV {len(rows)}")
    bad = 0
    for j, name in enumerate(header):
        col = t[name]
        for i, r in enumerate(rows):
            if not same_value(r[j], col[i]):
                bad += 1
                if bad < 5:
                    print(f"  {table_path}: row {i} column {name}: CSV '{r[j]}' astropy {col[i]!r}")
    check(bad == 0, f"{table_path}: {bad} values differ from the CSV output")
    for name, unit in units.items():
        check(t[name].unit == unit, f"{table_path}: unit of {name} is {t[name].unit}, want {unit}")
    if kind:
        key = "HEFTTAB" if table_path.endswith(".fits") else "heft_table"
        check(t.meta.get(key) == kind, f"{table_path}: metadata {key} = {t.meta.get(key)!r}, want {kind}")
    return t


# 1. heft's tables read by astropy.
screen_csv = os.path.join(work, "anomalies.csv")
run("screen", "-q", stars, "-o", screen_csv)
for ext in ("fits", "ecsv"):
    out = os.path.join(work, "anomalies." + ext)
    run("screen", "-q", stars, "-o", out)
    compare(screen_csv, out, None, {"dpm_late_ra": u.mas / u.yr, "dt_yr": u.yr, "reflex_vel_late_m_s": u.m / u.s})

rank_args = ["rank", "-q", stars, "--date", "2027.25", "--iwa", "80", "--owa", "2000", "--draws", "128", "--n-a", "8"]
rank_csv = os.path.join(work, "ranked.csv")
run(*rank_args, "-o", rank_csv)
for ext in ("fits", "ecsv"):
    out = os.path.join(work, "ranked." + ext)
    run(*rank_args, "-o", out)
    t = compare(rank_csv, out, "heft-rank", {"sep_med": u.mas, "a_best_au": u.AU})
    key = "HEFT DATE_YR" if ext == "fits" else "date_yr"
    check(str(t.meta.get(key)) == "2027.25", f"{out}: date_yr metadata {t.meta.get(key)!r}")
    check(t["rank"].dtype.kind == "i", f"{out}: rank is not an integer column")
    if ext == "ecsv":
        check(t["mass_med"].unit == u.M_jup, f"{out}: mass unit {t['mass_med'].unit}")
# Shards written as FITS merge into the CSV of a single run.
parts = []
for k in (1, 2):
    p = os.path.join(work, f"part{k}.fits")
    run(*rank_args, "--shard", f"{k}/2", "-o", p)
    parts.append(p)
merged = os.path.join(work, "merged.csv")
run("merge", "-q", *parts, "-o", merged)
check(open(merged).read() == open(rank_csv).read(), "merge of FITS shards differs from the single CSV run")

curve_csv = os.path.join(work, "curve.csv")
draws_csv = os.path.join(work, "draws.csv")
run("curve", "-q", stars, "--id", "KMG-00754", "--draws", "256", "--n-a", "6", "-o", curve_csv, "--keep-draws", draws_csv)
run("curve", "-q", stars, "--id", "KMG-00754", "--draws", "256", "--n-a", "6", "-o", os.path.join(work, "curve.fits"),
    "--keep-draws", os.path.join(work, "draws.ecsv"))
compare(curve_csv, os.path.join(work, "curve.fits"), None, {"sep_mas": u.mas, "a_au": u.AU})
compare(draws_csv, os.path.join(work, "draws.ecsv"), None, {"inc_deg": u.deg, "host_mass_msun": u.M_sun})
pred_csv = os.path.join(work, "pred.csv")
run("predict", "-q", draws_csv, "--date", "2027.25", "-o", pred_csv)
run("predict", "-q", os.path.join(work, "draws.ecsv"), "--date", "2027.25", "-o", os.path.join(work, "pred.ecsv"))
compare(pred_csv, os.path.join(work, "pred.ecsv"), None, {"sep_med": u.mas, "date_yr": u.yr})

# 2. astropy-written tables read by heft.
demo = Table.read(stars, format="ascii.csv")
unit_of = {}
for name in demo.colnames:
    base = name.split("_", 1)[1] if name.startswith(("early_", "late_")) else name
    if base in ("epoch", "window_start", "window_end"):
        unit_of[name] = u.yr
    elif base in ("ra", "dec"):
        unit_of[name] = u.deg
    elif base in ("pmra", "pmdec", "pmra_error", "pmdec_error"):
        unit_of[name] = u.mas / u.yr
    elif base in ("parallax", "ra_error", "dec_error", "parallax_error"):
        unit_of[name] = u.mas
    elif name in ("mass", "mass_error"):
        unit_of[name] = u.M_sun
    elif name in ("rv", "rv_error"):
        unit_of[name] = u.km / u.s
for name, unit in unit_of.items():
    demo[name].unit = unit
as_fits = os.path.join(work, "stars_astropy.fits")
as_ecsv = os.path.join(work, "stars_astropy.ecsv")
demo.write(as_fits)
demo.write(as_ecsv)  # astropy's default: space-delimited
for path in (as_fits, as_ecsv, as_fits + "[1]"):
    out = os.path.join(work, "screen_from_" + os.path.basename(path).replace("[1]", "_ext1") + ".csv")
    run("screen", "-q", path, "-o", out)
    check(open(out).read() == open(screen_csv).read(), f"screen of {path} differs from the CSV path")
# Pipes are read once: a FIFO (made in the work folder) carrying FITS, ECSV or CSV.
import threading
for path in (as_fits, as_ecsv, stars):
    fifo = os.path.join(work, "pipe")
    if os.path.exists(fifo):
        os.remove(fifo)
    os.mkfifo(fifo)
    def feed(src=path, dst=fifo):
        with open(src, "rb") as a, open(dst, "wb") as b:
            b.write(a.read())
    th = threading.Thread(target=feed)
    th.start()
    out = os.path.join(work, "screen_from_fifo.csv")
    run("screen", "-q", fifo, "-o", out)
    th.join()
    check(open(out).read() == open(screen_csv).read(), f"screen of {os.path.basename(path)} through a FIFO differs")
arcsec = demo.copy()
for name in ("early_ra_error", "late_ra_error", "late_parallax_error"):
    arcsec[name] = arcsec[name].to(u.arcsec)
as_arcsec = os.path.join(work, "stars_arcsec.fits")
arcsec.write(as_arcsec)
out = os.path.join(work, "screen_from_arcsec.csv")
run("screen", "-q", as_arcsec, "-o", out)
h1, r1, _ = read_csv(out)
h0, r0, _ = read_csv(screen_csv)
worst = 0.0
for a, b in zip(r0, r1):
    for x, y in zip(a[2:-1], b[2:-1]):
        if x and y:
            worst = max(worst, abs(float(x) - float(y)) / max(abs(float(x)), 1e-300))
check(len(r1) == len(r0) and worst < 1e-12, f"arcsec errors: worst relative difference {worst}")

# 3. NaN and TNULL as absent values.
holes = demo[:3].copy()
holes["late_parallax"][0] = np.nan
holes["id"] = ["H-1", "H-2", "H-3"]
# A masked integer: astropy writes it with TNULL (its second row null).
holes["seq"] = MaskedColumn(np.array([1, 2, 3], dtype=np.int32), mask=[False, True, False])
holes_path = os.path.join(work, "holes.fits")
holes.write(holes_path)
with fits.open(holes_path) as h:
    k = h[1].columns.names.index("seq") + 1
    check(f"TNULL{k}" in h[1].header, "astropy wrote no TNULL for the masked integer column")
p = run("screen", "-q", holes_path, "-o", os.path.join(work, "holes.csv"), code=4)
hh, hr, _ = read_csv(os.path.join(work, "holes.csv"))
check([r[1] for r in hr] == ["bad_input:missing_late_parallax", "ok", "ok"], f"NaN row: statuses {[r[1] for r in hr]}")
p = run("convert", holes_path, "-o", os.path.join(work, "holes_conv.csv"))
ch, cr, _ = read_csv(os.path.join(work, "holes_conv.csv"))
check([r[ch.index("seq")] for r in cr] == ["1", "", "3"], f"TNULL: seq column {[r[ch.index('seq')] for r in cr]}")

# 4. A unit heft does not know.
odd = demo[:2].copy()
odd["late_pmra"].unit = u.km / u.s
odd_path = os.path.join(work, "odd.fits")
odd.write(odd_path)
p = run("screen", "-q", odd_path, code=2)
check("late_pmra" in p.stderr, f"wrong-dimension unit: message does not name the column: {p.stderr.strip()}")

# 5. Presets for the public schemas, on invented extracts of the demo stars:
# the early one as an astropy FITS table with the weight matrix as a vector
# column UW (U upper triangular with U^T U = Sigma^-1, stored column by
# column: U11, U12, U22, U13, ...; docs/formats.md), the late one as CSV with
# the later archive's column names, joined through a pair table.
sub = demo[:40]
corr_names = ["ra_dec_corr", "ra_parallax_corr", "ra_pmra_corr", "ra_pmdec_corr", "dec_parallax_corr",
              "dec_pmra_corr", "dec_pmdec_corr", "parallax_pmra_corr", "parallax_pmdec_corr", "pmra_pmdec_corr"]
pairs_ij = [(0, 1), (0, 2), (0, 3), (0, 4), (1, 2), (1, 3), (1, 4), (2, 3), (2, 4), (3, 4)]


def covariance(row, prefix):
    err = [float(row[prefix + n]) for n in ("ra_error", "dec_error", "parallax_error", "pmra_error", "pmdec_error")]
    c = np.diag(np.square(err))
    for name, (i, j) in zip(corr_names, pairs_ij):
        v = row[prefix + name]
        r = 0.0 if np.ma.is_masked(v) else float(v)
        c[i, j] = c[j, i] = r * err[i] * err[j]
    return c


early = Table()
early["HIP"] = np.arange(1, len(sub) + 1)
early["RArad"] = np.asarray(sub["early_ra"], dtype=float) * u.deg
early["DErad"] = np.asarray(sub["early_dec"], dtype=float) * u.deg
early["Plx"] = np.asarray(sub["early_parallax"], dtype=float) * u.mas
early["pmRA"] = np.asarray(sub["early_pmra"], dtype=float) * u.mas / u.yr
early["pmDE"] = np.asarray(sub["early_pmdec"], dtype=float) * u.mas / u.yr
for col, name, unit in (("e_RArad", "ra_error", u.mas), ("e_DErad", "dec_error", u.mas), ("e_Plx", "parallax_error", u.mas),
                        ("e_pmRA", "pmra_error", u.mas / u.yr), ("e_pmDE", "pmdec_error", u.mas / u.yr)):
    early[col] = np.round(np.asarray(sub["early_" + name], dtype=float), 2) * unit  # rounded, as published
early["Hpmag"] = np.full(len(sub), 7.5) * u.mag
uw = np.zeros((len(sub), 15))
for k, row in enumerate(sub):
    U = np.linalg.cholesky(np.linalg.inv(covariance(row, "early_"))).T  # upper, U^T U = Sigma^-1
    uw[k] = [U[i, j] for j in range(5) for i in range(j + 1)]
early["UW"] = uw
early_path = os.path.join(work, "early_hip2007.fits")
early.write(early_path)
late = Table()
late["source_id"] = np.arange(10**15, 10**15 + len(sub))
late["ref_epoch"] = np.full(len(sub), 2016.0)
for n in ("ra", "dec", "parallax", "pmra", "pmdec", "ra_error", "dec_error", "parallax_error", "pmra_error",
          "pmdec_error", *corr_names):
    late[n] = np.asarray(sub["late_" + n].filled(0.0) if hasattr(sub["late_" + n], "filled") else sub["late_" + n], dtype=float)
late["radial_velocity"] = sub["rv"]
late["radial_velocity_error"] = sub["rv_error"]
late["phot_g_mean_mag"] = np.full(len(sub), 7.4)
late["ruwe"] = np.linspace(0.9, 2.5, len(sub))
late["astrometric_excess_noise"] = np.linspace(0.0, 0.4, len(sub))
late_path = os.path.join(work, "late_dr3.csv")
late.write(late_path, format="ascii.csv")
pairs_path = os.path.join(work, "pairs.csv")
with open(pairs_path, "w") as f:
    f.write("HIP,source_id\n")
    for k in range(len(sub)):
        f.write(f"{early['HIP'][k]},{late['source_id'][k]}\n")
joined = os.path.join(work, "joined.csv")
run("ingest", "-q", "--early", early_path, "--late", late_path, "--early-preset", "hip2007-main", "--late-preset",
    "dr3-source", "--xmatch", pairs_path, "--key-early", "HIP", "--key-late", "source_id", "-o", joined)
jh, jr, _ = read_csv(joined)
check(len(jr) == len(sub), f"presets: {len(jr)} stars joined of {len(sub)}")
worst = 0.0
for row, jrow in zip(sub, jr):
    got = dict(zip(jh, jrow))
    c0 = covariance(row, "early_")
    c1 = covariance({k: (float(v) if v else np.ma.masked) for k, v in got.items() if k != "id"}, "early_")
    worst = max(worst, float(np.max(np.abs(c1 - c0) / np.sqrt(np.outer(np.diag(c0), np.diag(c0))))))
check(worst < 1e-10, f"presets: covariance from the weight matrix off by {worst} (relative to sigma_i sigma_j)")
check("late_ruwe" in jh and "late_excess_noise_mas" in jh, f"presets: carried columns missing from {jh[-4:]}")
check(jr[-1][jh.index("late_ruwe")] == "2.5", f"presets: RUWE carried as {jr[-1][jh.index('late_ruwe')]}")
check(jr[0][jh.index("id")] == str(10**15), f"presets: id {jr[0][jh.index('id')]}")
# The joined table screens without warnings about unknown columns.
p = run("screen", joined, "-o", os.path.join(work, "joined_screen.csv"))
check("ignored" not in p.stderr and "unknown" not in p.stderr, f"presets: screen warns: {p.stderr.strip()}")
# A weight matrix in the wrong element order is caught by the catalogue's own errors.
swapped = early.copy()
swapped["UW"] = uw[:, ::-1]
swapped_path = os.path.join(work, "early_swapped.fits")
swapped.write(swapped_path)
p = run("ingest", "-q", "--early", swapped_path, "--late", late_path, "--early-preset", "hip2007-main", "--late-preset",
        "dr3-source", "--xmatch", pairs_path, "--key-early", "HIP", "--key-late", "source_id", code=2)
check("element order" in p.stderr, f"presets: a scrambled weight matrix is not refused: {p.stderr.strip()}")

print(f"{len(failures)} failed" if failures else "all astropy checks passed")
sys.exit(1 if failures else 0)
