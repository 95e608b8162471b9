#!/usr/bin/env python3
"""One finite-size exponent ω shared by several series, e.g. the same algorithm at several time
steps on the same instances: e(n) = e∞ + a·n^−ω per series, each fitted by weighted least
squares on its per-size means (weights 1/se², se the standard error over seeds), ω scanned
in steps of 0.01 for the least total χ². Prints the profile, the interval where the total χ²
lies within 1 of its least, and each series' e∞ (with the fit's standard error) at the best ω
and at the ω values given with --at.

  scripts/joint-omega.py [--kiln PATH] [--max-n N] [--only LABEL] [--at 0.5,0.6667] FOLDER...

FOLDER: a results folder (results/<experiment>); rows come from `kiln rows`. Pure Python, no
packages needed."""
import argparse, csv, io, math, statistics, subprocess

ap = argparse.ArgumentParser()
ap.add_argument("folders", nargs="+")
ap.add_argument("--kiln", default="kiln")
ap.add_argument("--max-n", type=int, default=None)
ap.add_argument("--at", default="0.5,0.6667")
ap.add_argument("--only", default="", help="keep algorithms whose label starts with this")
args = ap.parse_args()

series = {}
for folder in args.folders:
    out = subprocess.run(
        [args.kiln, "rows", folder, "--columns", "algorithm,n,epsilon,energy", "--format", "csv"],
        check=True, capture_output=True, text=True).stdout
    for r in csv.DictReader(io.StringIO(out)):
        n = int(r["n"])
        if float(r["epsilon"]) != 0.0 or (args.max_n and n > args.max_n) \
                or not r["algorithm"].startswith(args.only):
            continue
        series.setdefault((folder, r["algorithm"]), {}).setdefault(n, []).append(float(r["energy"]))
data = {k: {n: (statistics.mean(v), statistics.stdev(v) / math.sqrt(len(v))) for n, v in s.items()}
        for k, s in series.items()}

def fit(points, om):
    s = sx = sy = sxx = sxy = 0.0
    for n, (m, se) in points.items():
        w, x = 1 / se**2, n**-om
        s, sx, sy, sxx, sxy = s + w, sx + w * x, sy + w * m, sxx + w * x * x, sxy + w * x * m
    d = s * sxx - sx * sx
    a = (s * sxy - sx * sy) / d
    e = (sy - a * sx) / s
    chi = sum(((m - e - a * n**-om) / se) ** 2 for n, (m, se) in points.items())
    return e, math.sqrt(sxx / d), chi

profile = [(i / 100, sum(fit(p, i / 100)[2] for p in data.values())) for i in range(10, 151)]
best, least = min(profile, key=lambda t: t[1])
inside = [om for om, c in profile if c <= least + 1]
dof = sum(len(p) for p in data.values()) - 2 * len(data) - 1
print("series: " + ", ".join(f"{f} {a}" for f, a in data))
for om, c in profile[::10]:
    print(f"ω = {om:.2f}  total χ² = {c:.2f}")
print(f"best ω = {best:.2f} (total χ² {least:.2f} for {dof} degrees of freedom); "
      f"χ² within 1 of it for ω in [{min(inside):.2f}, {max(inside):.2f}]")
for om in [best] + [float(x) for x in args.at.split(",") if x]:
    c = sum(fit(p, om)[2] for p in data.values())
    cells = "  ".join(f"{a}: {fit(p, om)[0]:.4f}({round(fit(p, om)[1] * 1e4)})" for (f, a), p in data.items())
    print(f"ω = {om:.4f} (Δχ² {c - least:+.2f}): {cells}")
