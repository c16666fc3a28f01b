#!/usr/bin/python3
"""Integrity evidence over many demo towns: reads scripts/integrity-evidence.sh's seed folders
(each: town/town.json, town/survey/truth.csv, fit.json, and one replay folder per query drive
with fixes.csv) and writes OUT/evidence.json and OUT/evidence.md.

Per condition (a query drive kind), over the aliasing district (fixes whose truth lies in a
look-alike stretch of town.json, or in the stretch a twin mirrors), per kind of look-alike
street (terrace, chain shops, twin) and over the other streets of the survey route, over drives
held out from the overbound's fit:
  - protected fixes (refined, with protection levels), flagged usable, misleading (usable and the
    error beyond a protection level: horizontal, or cross/along beyond lateral/longitudinal),
    hazardous (misleading and beyond the alert limit the replay judged at: its summary.json's
    alert_limit_checked_m, 2 m without one);
  - episodes, the independent trials: one per (seed, drive, 50 m street segment) that holds a
    fix flagged usable (fixes.csv `segment`: the truth track cut by distance driven, so
    neighbouring frames of one stretch share a trial); the one-sided 95 % Clopper-Pearson upper
    bound of the share of episodes holding a misleading fix (exact: bisection on the binomial
    CDF, no third-party module);
  - availability at 1, 2, 5 and 10 m: fixes neither alerted nor above the limit, over queries;
  - wrong places: refined fixes more than 5 m off, and how many of them were flagged usable.
Such evidence validates a protection level to about 1e-3 at best, not to the far tails a safety
case needs; sightfix is a fallback aid, not a certified navigation source.
Usage: integrity_evidence.py OUT_DIR [MORE_DIR ...]
  Several folders (runs of the same script split over machines by --first and --seeds) are
  weighed together; OUT_DIR receives evidence.json and evidence.md. A seed found in two
  folders is refused: its towns would count twice.
"""
import csv
import glob
import json
import math
import os
import sys

ALERT_LIMIT_M = 2.0
LIMITS_M = (1.0, 2.0, 5.0, 10.0)
WRONG_M = 5.0
MARGIN_M = 10.0  # a look-alike stretch's reach beyond its ends, route metres


def binomial_cdf(k, n, p):
    """P(X <= k) for X ~ Bin(n, p), summed in log space."""
    if p <= 0:
        return 1.0
    if p >= 1:
        return 0.0 if k < n else 1.0
    lp, lq = math.log(p), math.log1p(-p)
    return sum(math.exp(math.lgamma(n + 1) - math.lgamma(i + 1) - math.lgamma(n - i + 1)
                        + i * lp + (n - i) * lq) for i in range(k + 1))


def cp_upper(k, n, confidence=0.95):
    """One-sided Clopper-Pearson upper bound (Clopper and Pearson, Biometrika 1934): the p at
    which P(X <= k) = 1 - confidence, by bisection (the CDF falls as p grows)."""
    if n == 0:
        return None
    if k >= n:
        return 1.0
    lo, hi = 0.0, 1.0
    for _ in range(100):
        mid = 0.5 * (lo + hi)
        if binomial_cdf(k, n, mid) > 1 - confidence:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def metres(lat0, lon0, lat1, lon1):
    """Local flat-earth distance (metres; a town's extent is well under a kilometre)."""
    k = math.pi / 180 * 6371008.8
    return math.hypot((lat1 - lat0) * k, (lon1 - lon0) * k * math.cos(lat0 * math.pi / 180))


def route_locator(town_dir):
    """Maps a position to route metres by the survey's out pass (its first half, one image
    every survey_spacing_m from the route's start), or None farther than 15 m from it."""
    rows = list(csv.DictReader(open(os.path.join(town_dir, "survey", "truth.csv"))))
    out = rows[: len(rows) // 2]
    along, acc = [], 0.0
    for i, r in enumerate(out):
        if i:
            acc += metres(float(out[i - 1]["lat"]), float(out[i - 1]["lon"]), float(r["lat"]),
                          float(r["lon"]))
        along.append(acc)
    pts = [(float(r["lat"]), float(r["lon"])) for r in out]

    def locate(lat, lon):
        d, i = min((metres(lat, lon, p[0], p[1]), i) for i, p in enumerate(pts))
        return along[i] if d < 15 else None
    return locate


def alias_spans(town):
    """(from, to, kind) in route metres of each look-alike stretch and of the stretch a twin
    mirrors, widened by MARGIN_M."""
    spans = []
    for s in town.get("look_alikes", []):
        spans.append((s["route_from_m"] - MARGIN_M, s["route_to_m"] + MARGIN_M, s["kind"]))
        if "mirrors" in s:
            spans.append((s["mirrors"]["route_from_m"] - MARGIN_M,
                          s["mirrors"]["route_to_m"] + MARGIN_M, s["kind"]))
    return spans


def new_tally():
    return {"queries": 0, "protected": 0, "usable": 0, "misleading": 0, "hazardous": 0,
            "episodes": set(), "misleading_episodes": set(), "available": [0] * len(LIMITS_M),
            "wrong_place": 0, "wrong_place_usable": 0, "seeds": set()}


def add(t, key, r, alert_limit_m):
    t["queries"] += 1
    t["seeds"].add(key[0])
    if r.get("quality") != "refined" or not r.get("hpl_m"):
        return
    err = float(r["error_m"])
    if err > WRONG_M:
        t["wrong_place"] += 1
        t["wrong_place_usable"] += r["integrity"] == "usable"
    if r["integrity"] in ("unavailable", ""):
        return
    t["protected"] += 1
    hpl = float(r["hpl_m"])
    alerted = r["integrity"] in ("fault_detected", "place_ambiguity")
    for k, limit in enumerate(LIMITS_M):
        t["available"][k] += (not alerted) and hpl <= limit
    if r["integrity"] != "usable":
        return
    t["usable"] += 1
    episode = key + (r["segment"],)
    t["episodes"].add(episode)
    beyond = (err > hpl or abs(float(r["cross_track_m"])) > float(r["lateral_pl_m"])
              or abs(float(r["along_track_m"])) > float(r["longitudinal_pl_m"]))
    if beyond:
        t["misleading"] += 1
        t["hazardous"] += err > alert_limit_m
        t["misleading_episodes"].add(episode)


def finish(t):
    n, k = len(t["episodes"]), len(t["misleading_episodes"])
    return {"seeds": len(t["seeds"]), "queries": t["queries"], "protected_fixes": t["protected"],
            "usable": t["usable"], "misleading": t["misleading"], "hazardous": t["hazardous"],
            "episodes": n, "misleading_episodes": k, "misleading_episode_share_upper95": cp_upper(k, n),
            "availability": {"%gm" % l: (a / t["queries"] if t["queries"] else None)
                             for l, a in zip(LIMITS_M, t["available"])},
            "wrong_place_fixes": t["wrong_place"], "wrong_place_usable": t["wrong_place_usable"]}


def judged_at(replay_dir):
    """The horizontal alert limit a replay judged its fixes at (summary.json): 2 m for a replay
    written before the field, None when it judged no fix."""
    try:
        j = json.load(open(os.path.join(replay_dir, "summary.json")))
        return float(j["integrity"]["protection"]["alert_limit_checked_m"]) or None
    except (OSError, KeyError, ValueError):
        return ALERT_LIMIT_M


def done_seeds(dirs):
    """The finished seed folders of every run folder, by seed name; None naming a seed twice."""
    found = {}
    for d in dirs:
        for seed_dir in sorted(glob.glob(os.path.join(d, "seed-*"))):
            if not os.path.exists(os.path.join(seed_dir, "done")):
                continue
            seed = os.path.basename(seed_dir)
            if seed in found:
                return None, "%s is in both %s and %s" % (seed, found[seed], seed_dir)
            found[seed] = seed_dir
    return found, None


def main(dirs):
    out = dirs[0]
    seeds, clash = done_seeds(dirs)
    if clash:
        sys.stderr.write("integrity_evidence: %s: a town would count twice\n" % clash)
        sys.exit(2)
    rows, fits, limits = {}, {}, set()
    for seed, seed_dir in sorted(seeds.items()):
        town = json.load(open(os.path.join(seed_dir, "town", "town.json")))
        fit = json.load(open(os.path.join(seed_dir, "fit.json")))
        fits[seed] = fit["overbound_scale"]
        locate, spans = route_locator(os.path.join(seed_dir, "town")), alias_spans(town)
        for fixes in sorted(glob.glob(os.path.join(seed_dir, "query-*", "fixes.csv"))):
            drive = os.path.basename(os.path.dirname(fixes))
            held_out = drive != fit["drive"]
            cond = drive.replace("query-", "") + ("" if held_out else " (the fit's drive)")
            limit = judged_at(os.path.dirname(fixes))
            if limit is not None:
                limits.add(limit)
            else:  # no protected fix (a night drive): nothing is judged
                limit = ALERT_LIMIT_M
            for r in csv.DictReader(open(fixes)):
                key = (seed, drive)
                add(rows.setdefault(cond, new_tally()), key, r, limit)
                if not held_out:
                    continue
                add(rows.setdefault("all held out", new_tally()), key, r, limit)
                m = locate(float(r["true_lat"]), float(r["true_lon"]))
                if m is None:  # off the survey route (the off-map drive's detour)
                    continue
                kinds = sorted({kind for a, b, kind in spans if a <= m <= b})
                streets = ["aliasing district"] + ["aliasing district: " + k for k in kinds]
                for name in streets if kinds else ["other streets"]:
                    add(rows.setdefault(name, new_tally()), key, r, limit)
    result = {"seeds": len(fits), "overbound_scale_by_seed": fits,
              "rows": {k: finish(v) for k, v in sorted(rows.items())},
              "alert_limit_m": sorted(limits), "episode": "(seed, drive, 50 m street segment) "
              "holding a fix flagged usable"}
    json.dump(result, open(os.path.join(out, "evidence.json"), "w"), indent=2)
    lines = ["%d demo towns (realistic world), no prior, fixes judged at a %s m alert limit; "
             "overbound fitted per town on its day "
             "drive, the other drives held out. Episode: %s. Upper bound: one-sided 95 %% "
             "Clopper-Pearson over episodes. A simulated town: such evidence validates the "
             "protection level to about 1e-3 at best; sightfix is a fallback aid, not a certified "
             "navigation source." % (len(fits), "/".join("%g" % l for l in sorted(limits)) or "-",
                                     result["episode"]), "",
             "| condition | seeds | queries | protected | usable | misleading | hazardous | "
             "episodes | bound | avail 1/2/5/10 m | wrong places (usable) |",
             "| --- |" + " --- |" * 10]
    for name, r in result["rows"].items():
        a = r["availability"]
        bound = r["misleading_episode_share_upper95"]
        lines.append("| %s | %d | %d | %d | %d | %d | %d | %d | %s | %s | %d (%d) |" % (
            name, r["seeds"], r["queries"], r["protected_fixes"], r["usable"], r["misleading"],
            r["hazardous"], r["episodes"], "-" if bound is None else "%.4f" % bound,
            " / ".join("-" if a[k] is None else "%.2f" % a[k] for k in a),
            r["wrong_place_fixes"], r["wrong_place_usable"]))
    open(os.path.join(out, "evidence.md"), "w").write("\n".join(lines) + "\n")
    print("\n".join(lines))


if __name__ == "__main__":
    if len(sys.argv) < 2 or sys.argv[1] in ("-h", "--help"):
        print(__doc__)
        sys.exit(0 if len(sys.argv) == 2 else 2)
    main(sys.argv[1:])
