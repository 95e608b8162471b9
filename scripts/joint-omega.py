#!/usr/bin/env python3
"""One finite-size exponent ω shared by several series, e.g. the same algorithm at several time
steps on the same instances. For each ω on a grid (steps of 0.01) every series is fitted by
`kiln fit --omega ω` (e(n) = e∞ + a·n^−ω, kiln's own weighted fit, no bootstrap) and the χ²
of the series are summed. Prints the profile, the interval where the summed χ² lies within 1
of its least, and each series' e∞ (with the fit's standard error) at the best ω and at the ω
values given with --at.

  scripts/joint-omega.py [--kiln PATH] [--max-n N] [--only LABEL] [--at 0.5,0.6667]
                         [--range 0.10,1.50] FOLDER...

FOLDER: a results folder (results/<experiment>); a series is one (folder, algorithm) at ε = 0.
Pure Python, no packages needed."""
import argparse, json, os, shutil, subprocess, tempfile

ap = argparse.ArgumentParser()
ap.add_argument("folders", nargs="+")
ap.add_argument("--kiln", default="kiln")
ap.add_argument("--max-n", type=int, default=None)
ap.add_argument("--at", default="0.5,0.6667")
ap.add_argument("--range", default="0.10,1.50", help="ω from,to scanned in steps of 0.01")
ap.add_argument("--only", default="", help="keep algorithms whose label starts with this")
args = ap.parse_args()

# `kiln fit` writes its tables into the folder it fits: fit copies, never the committed files.
scratch = tempfile.mkdtemp(prefix="joint-omega-")
copies = {}
for i, folder in enumerate(args.folders):
    copy = os.path.join(scratch, str(i), os.path.basename(os.path.normpath(folder)))
    os.makedirs(copy)
    for name in ("cells.parquet", "manifest.toml"):
        shutil.copy(os.path.join(folder, name), copy)
    copies[folder] = copy


def fits(omega):
    """{(folder, algorithm): (e∞, its standard error, χ²)} at exponent ω."""
    out = {}
    for folder in args.folders:
        cmd = [args.kiln, "fit", copies[folder], "--json", "--bootstrap", "0", "--omega", f"{omega:.4f}"]
        if args.max_n:
            cmd += ["--max-n", str(args.max_n)]
        v = json.loads(subprocess.run(cmd, check=True, capture_output=True, text=True).stdout)
        for f in v["fits"]:
            if f["epsilon"] == 0.0 and f["algorithm"].startswith(args.only):
                out[(folder, f["algorithm"])] = (f["e_inf"], f["e_inf_se"], f["chi2"])
    return out


lo, hi = (round(float(x) * 100) for x in args.range.split(","))
profile = [(i / 100, sum(c for _, _, c in fits(i / 100).values())) for i in range(lo, hi + 1)]
best, least = min(profile, key=lambda t: t[1])
inside = [om for om, c in profile if c <= least + 1]
print("series: " + ", ".join(f"{f} {a}" for f, a in fits(best)))
for om, c in profile[::10]:
    print(f"ω = {om:.2f}  summed χ² = {c:.2f}")
print(f"best ω = {best:.2f} (summed χ² {least:.2f}); "
      f"χ² within 1 of it for ω in [{min(inside):.2f}, {max(inside):.2f}]")
for om in [best] + [float(x) for x in args.at.split(",") if x]:
    fs = fits(om)
    c = sum(x[2] for x in fs.values())
    cells = "  ".join(f"{a}: {e:.4f}({round(se * 1e4)})" for (_, a), (e, se, _) in fs.items())
    print(f"ω = {om:.4f} (Δχ² {c - least:+.2f}): {cells}")
shutil.rmtree(scratch)
