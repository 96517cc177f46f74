#!/usr/bin/python3
"""heft report's plan page, loaded in a real browser (Debian's chromium,
driven headless through chromedriver's W3C WebDriver interface).

Source: the W3C WebDriver recommendation (session, navigate, execute
script, take screenshot) with Debian's chromium and chromium-driver as the
reference renderer; the expected rows come from heft rank's own ranked
table.

1. A ranking of the demo survey (at most 8 curves), reported with --top 0:
   the candidates table has one row per ranked star with a curve, in rank
   order with the ranked table's ids; every figure (two per candidate) is
   an inline SVG laid out with a non-empty size whose drawing has a
   non-empty bounding box; the page loaded no resource (self-contained);
   the same page from the CSV ranked table is identical but for the
   file's name.
2. A screenshot of the page is kept as a test artifact (WORK/plan.png).
3. A file that is not a ranked table or rank JSON is refused with exit 2
   and an error naming the file.

Usage: chromium_report.py HEFT SOURCE_DIR WORK_DIR
"""
import base64
import csv
import json
import os
import shutil
import socket
import subprocess
import sys
import time
import urllib.request

heft, src, work = sys.argv[1:4]
shutil.rmtree(work, ignore_errors=True)
os.makedirs(work)
stars = os.path.join(src, "demo", "survey", "stars.csv")
failures = []


def check(ok, what):
    if not ok:
        failures.append(what)
        print("FAIL:", what)


def run(args, code=0):
    p = subprocess.run([heft] + args, capture_output=True, text=True)
    if p.returncode != code:
        sys.exit(f"heft {' '.join(args)}: exit {p.returncode}, expected {code}\n{p.stderr}")
    return p


ranked_csv, ranked_json = os.path.join(work, "ranked.csv"), os.path.join(work, "ranked.json")
plan, plan2 = os.path.join(work, "plan.html"), os.path.join(work, "plan_from_csv.html")
run(["rank", stars, "--date", "2027.25", "--iwa", "80", "--owa", "2000", "--target-mass", "5,80",
     "--max-curves", "8", "--draws", "128", "--n-a", "12", "--dates", "2026.5:2030.5:0.5", "-q",
     "-o", ranked_csv, "--json", ranked_json])
run(["report", ranked_json, "--top", "0", "-q", "-o", plan])
run(["report", ranked_csv, "--top", "0", "-q", "-o", plan2])
check(open(plan).read().replace(ranked_json, ranked_csv) == open(plan2).read(),
      "the page from the CSV table equals the page from the JSON (but for the file's name)")
with open(ranked_csv) as f:
    next(f)  # run metadata
    rows = list(csv.DictReader(f))
expected = [r["id"] for r in sorted(rows, key=lambda r: int(r["rank"])) if r["status"] == "ok" and r["p_real"] != ""]
check(len(expected) == 8, f"8 stars with curves in the ranking, got {len(expected)}")

# Bad input: the star table is not a ranked table.
p = run(["report", stars, "-q", "-o", os.path.join(work, "bad.html")], code=2)
check(stars in p.stderr, f"the error names the file: {p.stderr.strip()}")
check(not os.path.exists(os.path.join(work, "bad.html")), "no page written on bad input")


def free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def call(method, url, body=None):
    data = json.dumps(body).encode() if body is not None else None
    req = urllib.request.Request(url, data=data, method=method, headers={"Content-Type": "application/json"})
    with urllib.request.urlopen(req, timeout=120) as r:
        return json.loads(r.read())["value"]


port = free_port()
driver = subprocess.Popen(["/usr/bin/chromedriver", f"--port={port}"], stdout=subprocess.DEVNULL,
                          stderr=subprocess.DEVNULL)
base = f"http://127.0.0.1:{port}"
try:
    for _ in range(100):
        try:
            call("GET", base + "/status")
            break
        except OSError:
            time.sleep(0.1)
    caps = {"capabilities": {"alwaysMatch": {"browserName": "chrome", "goog:chromeOptions": {
        "binary": "/usr/bin/chromium",
        "args": ["--headless=new", "--no-sandbox", "--disable-gpu", "--window-size=1400,2400",
                 "--user-data-dir=" + os.path.join(work, "profile")]}}}}
    sid = call("POST", base + "/session", caps)["sessionId"]
    s = f"{base}/session/{sid}"
    call("POST", s + "/url", {"url": "file://" + os.path.abspath(plan)})
    page = call("POST", s + "/execute/sync", {"args": [], "script": """
      const rows = [...document.querySelectorAll('#candidates tbody tr')];
      const svgs = [...document.querySelectorAll('svg')];
      return {
        ids: rows.map(r => r.cells[1].textContent.trim()),
        ranks: rows.map(r => parseInt(r.cells[0].textContent)),
        figures: svgs.map(g => {
          const box = g.getBoundingClientRect();
          const drawn = [...g.querySelectorAll('polygon, polyline, path, rect, circle')].filter(e => {
            const b = e.getBBox(); return b.width > 0 || b.height > 0; }).length;
          return {w: box.width, h: box.height, drawn: drawn};
        }),
        images: [...document.images].map(i => i.complete && i.naturalWidth > 0),
        resources: performance.getEntriesByType('resource').length,
        scripts: document.scripts.length,
      };"""})
    shot = call("GET", s + "/screenshot")
    with open(os.path.join(work, "plan.png"), "wb") as f:
        f.write(base64.b64decode(shot))
    call("DELETE", s)
finally:
    driver.terminate()
    driver.wait()

check(page["ids"] == expected, f"table rows {page['ids']} are the ranked stars with curves {expected}")
check(page["ranks"] == sorted(page["ranks"]), "rows in rank order")
check(len(page["figures"]) == 2 * len(expected), f"two figures per candidate: {len(page['figures'])}")
for k, fig in enumerate(page["figures"]):
    check(fig["w"] > 200 and fig["h"] > 200 and fig["drawn"] >= 5, f"figure {k} renders: {fig}")
check(all(page["images"]), "every <img> loaded")
check(page["resources"] == 0 and page["scripts"] == 0, "self-contained: no resource loaded, no script")
check(os.path.getsize(os.path.join(work, "plan.png")) > 10000, "screenshot written")
print(f"{len(expected)} rows, {len(page['figures'])} figures; screenshot {os.path.join(work, 'plan.png')}")
if failures:
    sys.exit(f"{len(failures)} failure(s)")
