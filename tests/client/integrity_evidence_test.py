#!/usr/bin/python3
"""scripts/integrity_evidence.py counted by hand on a made-up seed folder: one town whose survey
drives due east from a point (so route metres are easy to place), a look-alike stretch, the
fit's day drive and one held-out dusk drive whose rows cover every case (usable within its
levels; misleading by the horizontal level; misleading by the lateral level alone and beyond the
2 m alert limit, so hazardous; a wrong place kept from use; a coarse fix; a usable fix in the
aliasing district). The Clopper-Pearson bound of 2 misleading episodes out of 3 is solved by
hand: P(X <= 2) = 1 - p^3 = 0.05 gives p = 0.95^(1/3) (Clopper and Pearson, Biometrika 1934).
Then the same folder weighed with a second run folder, as a run split over machines is.
Usage: integrity_evidence_test.py SOURCE_DIR
"""
import csv
import json
import math
import os
import shutil
import subprocess
import sys
import tempfile

src = sys.argv[1]
failed = 0


def check(name, ok):
    global failed
    print(("ok   " if ok else "FAIL ") + name)
    failed += not ok


LAT0, LON0 = 44.0, -40.0
M_PER_DEG_LON = math.pi / 180 * 6371008.8 * math.cos(math.radians(LAT0))


def east(m):
    return LON0 + m / M_PER_DEG_LON


FIELDS = ["image", "true_lat", "true_lon", "quality", "error_m", "hpl_m", "lateral_pl_m",
          "longitudinal_pl_m", "along_track_m", "cross_track_m", "integrity", "segment"]


def fix(image, route_m, quality, error, hpl, lat_pl, lon_pl, along, cross, state, segment):
    return dict(zip(FIELDS, [image, LAT0, east(route_m), quality, error, hpl, lat_pl, lon_pl,
                             along, cross, state, segment]))


with tempfile.TemporaryDirectory() as out:
    seed = os.path.join(out, "seed-1")
    os.makedirs(os.path.join(seed, "town", "survey"))
    json.dump({"look_alikes": [{"kind": "twin", "route_from_m": 200, "route_to_m": 240}]},
              open(os.path.join(seed, "town", "town.json"), "w"))
    with open(os.path.join(seed, "town", "survey", "truth.csv"), "w") as f:
        f.write("image,lat,lon\n")
        for k in range(300):  # out 0..598 m every 2 m, then back
            m = 2 * k if k < 150 else 2 * (299 - k)
            f.write("%d,%.9f,%.9f\n" % (k, LAT0, east(m)))
    json.dump({"overbound_scale": 1.2, "drive": "query-day"}, open(os.path.join(seed, "fit.json"), "w"))
    rows = {
        "query-day": [fix("d0", 10, "refined", 9, 1, 1, 1, 9, 0, "usable", 0)],  # the fit's own
        "query-dusk": [
            fix("a", 10, "refined", 0.3, 1.0, 0.8, 0.9, 0.2, 0.2, "usable", 0),
            fix("b", 15, "refined", 1.5, 1.2, 1.0, 2.0, 0.5, 1.4, "usable", 0),  # > HPL
            fix("c", 60, "refined", 2.5, 3.0, 2.0, 3.0, 0.1, 2.49, "usable", 1),  # > lateral
            fix("d", 70, "refined", 10, 3.0, 2.0, 3.0, 10, 0, "over_alert_limit", 1),
            fix("e", 80, "coarse", 20, "", "", "", 0, 0, "unavailable", 1),
            fix("f", 220, "refined", 0.2, 1.0, 0.8, 0.9, 0.1, 0.1, "usable", 4),  # aliasing
        ]}
    for drive, rs in rows.items():
        os.makedirs(os.path.join(seed, drive))
        with open(os.path.join(seed, drive, "fixes.csv"), "w") as f:
            w = csv.DictWriter(f, FIELDS)
            w.writeheader()
            w.writerows(rs)
    open(os.path.join(seed, "done"), "w").close()
    run = subprocess.run(["/usr/bin/python3", os.path.join(src, "scripts", "integrity_evidence.py"),
                          out], capture_output=True, text=True)
    check("the script runs (%s)" % run.stderr.strip()[-200:], run.returncode == 0)
    ev = json.load(open(os.path.join(out, "evidence.json")))
    held = ev["rows"]["all held out"]
    check("queries 6, protected 5 (the coarse fix is not)",
          held["queries"] == 6 and held["protected_fixes"] == 5)
    check("usable 4, misleading 2, hazardous 1",
          (held["usable"], held["misleading"], held["hazardous"]) == (4, 2, 1))
    check("episodes: 3 segments hold a usable fix, 2 a misleading one",
          (held["episodes"], held["misleading_episodes"]) == (3, 2))
    check("Clopper-Pearson 2 of 3: 0.95^(1/3)",
          abs(held["misleading_episode_share_upper95"] - 0.95 ** (1 / 3)) < 1e-9)
    check("wrong places 1, none usable",
          (held["wrong_place_fixes"], held["wrong_place_usable"]) == (1, 0))
    check("availability at 2 m: 3 of 6 (a, b, f; c and d over the limit)",
          abs(held["availability"]["2m"] - 0.5) < 1e-12)
    alias = ev["rows"]["aliasing district"]
    check("the aliasing district holds f only", (alias["queries"], alias["usable"]) == (1, 1))
    check("the twin street holds f too", ev["rows"]["aliasing district: twin"] == alias)
    other = ev["rows"]["other streets"]
    check("the other streets hold a-e", (other["queries"], other["usable"]) == (5, 3))
    day = ev["rows"]["day (the fit's drive)"]
    check("the fit's drive stands apart, not in the held-out total",
          day["misleading"] == 1 and held["queries"] == 6)
    check("the dusk row is the held-out total here", ev["rows"]["dusk"] == held)
    # Zero of 50: 1 - 0.05^(1/50) = 0.0582 (the rule of three's exact form, common practice).
    sys.path.insert(0, os.path.join(src, "scripts"))
    import integrity_evidence
    check("Clopper-Pearson 0 of 50: 1 - 0.05^(1/50)",
          abs(integrity_evidence.cp_upper(0, 50) - (1 - 0.05 ** (1 / 50))) < 1e-9)
    # scipy.stats.beta.ppf(0.95, 6, 295) = 0.034722244301295 (SciPy 1.10.1, Debian's).
    check("Clopper-Pearson 5 of 300 as scipy",
          abs(integrity_evidence.cp_upper(5, 300) - 0.034722244301295) < 1e-12)
    check("Clopper-Pearson 0 of 2996 is about 1e-3 (the goal's episode count)",
          abs(integrity_evidence.cp_upper(0, 2996) - 0.001) < 2e-6)
    # A run split over two machines: the second folder's seed-2 (a copy of seed-1) is weighed
    # with the first's, and the same seed in both folders is refused.
    with tempfile.TemporaryDirectory() as other:
        shutil.copytree(seed, os.path.join(other, "seed-2"))
        script = os.path.join(src, "scripts", "integrity_evidence.py")
        run = subprocess.run(["/usr/bin/python3", script, out, other], capture_output=True,
                             text=True)
        both = json.load(open(os.path.join(out, "evidence.json")))
        check("two folders: two towns, twice the held-out queries and episodes",
              run.returncode == 0 and both["seeds"] == 2 and
              both["rows"]["all held out"]["queries"] == 12 and
              both["rows"]["all held out"]["episodes"] == 6)
        shutil.copytree(seed, os.path.join(other, "seed-1"))
        run = subprocess.run(["/usr/bin/python3", script, out, other], capture_output=True,
                             text=True)
        check("the same seed in two folders is refused (%s)" % run.stderr.strip(),
              run.returncode == 2 and "seed-1 is in both" in run.stderr)
sys.exit(1 if failed else 0)
