//! `kiln fit` end to end: SK ground-state extrapolation from annealing, outputs, refusals.

use crate::util::{Work, stderr};
use kiln::store::table;

/// Parisi value for SK, lim max H/n: 0.7631667 (Crisanti & Rizzo, Phys. Rev. E 65, 046137
/// (2002), arXiv:cond-mat/0111037).
const PARISI: f64 = 0.7631667;

/// kiln's algorithmic threshold for the pure 3-spin cube, ξ = q³/2 (`kiln theory --mixture
/// 3:0.5`, with the boundary layer at q = 0 on the zoomed lattice; tests/cli/theory.rs checks
/// that kiln still computes it, to 1e-7). Before the zoom it printed 0.8002167.
pub const ALG_PURE3: f64 = 0.7999735;

/// kiln's Parisi value for the same model (full RSB with free breakpoints; ≈ 0.8132 is the value
/// usually quoted in this normalisation, recalled from the literature, not read).
const PARISI_PURE3: f64 = 0.8131702;

/// kiln's algorithmic threshold for the cube mixture ξ = q²/2 + q³/4, where it equals kiln's
/// Parisi value (`kiln theory --mixture 2:0.5,3:0.25`: the extended minimiser is the Parisi
/// minimiser, 4e-15 apart).
const ALG_MIX: f64 = 0.9662581;

const GROUND: &str = r#"[experiment]
name = "sk-ground"
note = "Extrapolate long annealing at n ≤ 512 to n → ∞"
[model]
family = "sk"
[sweep]
sizes = [32, 64, 128, 256, 512]
seeds = 24
[[algorithm]]
label = "anneal"
kind = "anneal"
sweeps = 3000
beta = [0.1, 5.0]
[[algorithm]]
label = "descent"
kind = "descent"
"#;

/// Long annealing at n = 32…512 (24 seeds) extrapolated with ω = 2/3 (Boettcher, Eur. Phys. J.
/// B 46, 501 (2005), arXiv:cond-mat/0407130) lands within 1% of the Parisi value, and within
/// 2 of its own standard errors plus a stated systematic allowance of 0.005 (annealing does
/// not quite reach the ground state at n = 512 with 3000 sweeps, which biases e∞ low).
#[test]
fn sk_ground_state_extrapolation() {
    let w = Work::new();
    let s = w.spec("g.toml", GROUND);
    w.run_json(&s, &[]);
    let o = w.kiln(&["fit", s.to_str().unwrap(), "--json", "--bootstrap", "300"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let fits = v["fits"].as_array().unwrap();
    let anneal = fits.iter().find(|f| f["algorithm"] == "anneal").unwrap();
    let e = anneal["e_inf"].as_f64().unwrap();
    let se = anneal["e_inf_se"].as_f64().unwrap();
    assert!((e - PARISI).abs() < 0.01 * PARISI, "e∞ = {e} ± {se}");
    assert!((e - PARISI).abs() <= 2.0 * se + 0.005, "e∞ = {e} ± {se}");
    assert!(anneal["e_inf_se_bootstrap"].as_f64().unwrap() > 0.0);
    // Descent extrapolates near 0.69 (common practice; shared references give 0.685–0.695),
    // and the paired difference to annealing is positive by many of its standard errors.
    let descent = fits.iter().find(|f| f["algorithm"] == "descent").unwrap();
    assert!(
        (descent["e_inf"].as_f64().unwrap() - 0.69).abs() < 0.02,
        "{descent}"
    );
    let d = &v["differences"][0];
    assert_eq!(d["a"], "anneal");
    assert!(
        d["difference"].as_f64().unwrap() > 5.0 * d["se_bootstrap"].as_f64().unwrap(),
        "{d}"
    );

    let dir = w.path().join("results/sk-ground");
    let ext = table::read(&dir.join("extrapolation.parquet")).unwrap();
    for c in [
        "e_inf",
        "e_inf_se",
        "e_inf_se_bootstrap",
        "omega",
        "chi2",
        "dof",
        "e_inf_drop_smallest",
        "drop_shift_sigma",
    ] {
        assert!(ext.column(c).is_ok(), "missing {c}");
    }
    let tex = std::fs::read_to_string(dir.join("extrapolation.tex")).unwrap();
    assert!(
        tex.contains("\\toprule") && tex.contains("\\bottomrule"),
        "{tex}"
    );
    assert!(tex.contains("anneal & 0 & 5 & 0.7"), "{tex}");
    // --min-n drops sizes.
    let o = w.kiln(&[
        "fit",
        s.to_str().unwrap(),
        "--json",
        "--min-n",
        "64",
        "--bootstrap",
        "0",
    ]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["fits"][0]["sizes"], 4);
}

#[test]
fn fit_refuses_without_a_table_or_with_bad_options() {
    let w = Work::new();
    let s = w.spec("g.toml", GROUND);
    let o = w.kiln(&["fit", s.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("no table at results/sk-ground/cells.parquet"),
        "{}",
        stderr(&o)
    );
    let o = w.kiln(&["fit", s.to_str().unwrap(), "--omega", "-1"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
}

/// The spec's `[fit]` section sets the defaults: fitted ω, reference runs only, a size cut.
#[test]
fn spec_fit_section_chooses() {
    let w = Work::new();
    let text = GROUND
        .replace("seeds = 24", "seeds = 6\nepsilons = [0.0, 0.2]")
        .replace("sweeps = 3000", "sweeps = 200")
        + "\n[fit]\nomega = \"fit\"\nepsilon = \"reference\"\nmin_n = 64\nbootstrap = 50\n";
    let s = w.spec("g.toml", &text);
    w.run_json(&s, &[]);
    let o = w.kiln(&["fit", s.to_str().unwrap(), "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let fits = v["fits"].as_array().unwrap();
    assert_eq!(fits.len(), 2, "one group per algorithm at ε = 0 only");
    for f in fits {
        assert_eq!(f["epsilon"], 0.0);
        assert_eq!(f["sizes"], 4);
        assert!(
            f["omega_se"].as_f64().unwrap() > 0.0,
            "ω was not fitted: {f}"
        );
    }
    // A flag overrides the spec.
    let o = w.kiln(&[
        "fit",
        s.to_str().unwrap(),
        "--json",
        "--omega",
        "0.5",
        "--min-n",
        "32",
    ]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["fits"][0]["omega"], 0.5);
    assert_eq!(v["fits"][0]["sizes"], 5);
    // A bad value is located.
    let bad = w.spec(
        "b.toml",
        &text.replace("omega = \"fit\"", "omega = \"fast\""),
    );
    let o = w.kiln(&["check", bad.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("key `fit.omega`"), "{}", stderr(&o));
}

/// The `kiln fit --json` record of one algorithm in a committed results folder, fitted from a
/// copy of its table (made in `w` on first use) with the extra `args`.
fn committed_fit_record(w: &Work, folder: &str, label: &str, args: &[&str]) -> serde_json::Value {
    let dir = w.path().join("results").join(folder);
    if !dir.exists() {
        let src = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("results")
            .join(folder);
        std::fs::create_dir_all(&dir).unwrap();
        for f in ["cells.parquet", "manifest.toml"] {
            std::fs::copy(src.join(f), dir.join(f)).unwrap();
        }
    }
    let mut a = vec!["fit", dir.to_str().unwrap(), "--json"];
    a.extend_from_slice(args);
    let o = w.kiln(&a);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    v["fits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["algorithm"] == label)
        .unwrap_or_else(|| panic!("{label}: {v}"))
        .clone()
}

/// A fit of one algorithm in a committed results folder (300 bootstrap resamplings of
/// instances): (e∞, the larger of the fit's and the bootstrap's standard error), after checking
/// the number of sizes.
fn committed_fit(w: &Work, folder: &str, label: &str, args: &[&str], sizes: u64) -> (f64, f64) {
    let mut a = vec!["--bootstrap", "300"];
    a.extend_from_slice(args);
    let f = committed_fit_record(w, folder, label, &a);
    assert_eq!(f["sizes"], sizes, "{f}");
    let se = f["e_inf_se"]
        .as_f64()
        .unwrap()
        .max(f["e_inf_se_bootstrap"].as_f64().unwrap());
    (f["e_inf"].as_f64().unwrap(), se)
}

/// The summed χ² of fits with one exponent ω shared by several series (the same algorithm at
/// several steps, from committed folders): at ω = 1/2 it lies within 1 of its least over
/// ω = 0.3, 0.4, … 0.8 (the usual Δχ² = 1 interval for one parameter, common practice).
/// `scripts/joint-omega.py` scans it finely.
fn assert_half_is_a_shared_exponent(w: &Work, studies: &[(&str, &str)], max_n: &str) {
    let profile: Vec<(f64, f64)> = (3..=8)
        .map(|i| {
            let omega = (i as f64 / 10.0).to_string();
            let args = ["--bootstrap", "0", "--max-n", max_n, "--omega", &omega];
            let chi2 = studies
                .iter()
                .map(|(folder, label)| {
                    committed_fit_record(w, folder, label, &args)["chi2"]
                        .as_f64()
                        .unwrap()
                })
                .sum::<f64>();
            (i as f64 / 10.0, chi2)
        })
        .collect();
    let least = profile.iter().map(|p| p.1).fold(f64::MAX, f64::min);
    eprintln!("summed χ² over ω: {profile:?}");
    let half = profile
        .iter()
        .find(|p| p.0 == 0.5)
        .expect("ω = 0.5 in the scan")
        .1;
    assert!(half <= least + 1.0, "{profile:?}");
}

/// Incremental AMP on the pure 3-spin cube at δ = 0.01, the committed study
/// `results/cube-pure3-iamp` (n = 200 … 1400, 32 instances; the replay test recomputes a sample
/// of it from its spec). No algorithm that is Lipschitz in the disorder, iAMP at a fixed step
/// included, exceeds the algorithmic threshold ALG (Huang & Sellke 2021, arXiv:2110.07847), and
/// iAMP reaches it only as δ → 0 after n → ∞ (El Alaoui, Montanari & Sellke 2021,
/// arXiv:2001.00904, Theorem 3): so with the exponent fitted e∞ must not exceed ALG by 2 of its
/// standard errors, and at this step, with ω = 1/2 or 2/3, it must lie 4 below ALG (the
/// step's own loss, which the next test removes). The standard error is the larger of the fit's
/// and the bootstrap's over instances. Measured (revision 4): free 0.770(37), ω = 0.62(24);
/// 0.776(2) at 1/2; 0.769(1) at 2/3 (README, "Incremental AMP without a p = 2 term").
#[test]
fn iamp_on_the_pure_3_spin_cube_at_one_step_stays_below_the_threshold() {
    let w = Work::new();
    let (e, se) = committed_fit(&w, "cube-pure3-iamp", "iamp", &["--omega", "fit"], 7);
    eprintln!("iamp e∞ = {e} ± {se}; ALG {ALG_PURE3}, Parisi {PARISI_PURE3}");
    assert!(e <= ALG_PURE3 + 2.0 * se, "e∞ = {e} ± {se} above ALG");
    for omega in ["0.5", "0.6666666666666666"] {
        let (e, se) = committed_fit(&w, "cube-pure3-iamp", "iamp", &["--omega", omega], 7);
        assert!(e < ALG_PURE3 - 4.0 * se, "ω = {omega}: e∞ = {e} ± {se}");
    }
}

/// The calibration study `results/cube-mixture-iamp`: iAMP at δ = 0.01 on ξ = q²/2 + q³/4, at the
/// pure 3-spin study's sizes (200 … 1400) and instance count (32). Here the threshold is the
/// Parisi value, and iAMP reaches it as n → ∞ and then δ → 0 (El Alaoui, Montanari & Sellke
/// 2021, arXiv:2001.00904, Theorem 3), not at a fixed step: with the exponent fitted e∞ must
/// not exceed the threshold by 2 standard errors (Huang & Sellke 2021, arXiv:2110.07847), and
/// with it fixed at 2/3 or 1/2 the step's loss shows, e∞ lying more than 4 standard errors
/// below. The pure 3-spin study at the same step falls further short of its own threshold,
/// relative to it, at either exponent (the pure model's first steps carry less signal). The
/// standard error is the larger of the fit's and the bootstrap's (300 resamplings of
/// instances). Measured (revision 4): free 0.939(13); 0.9435(17) (2.4% short) at 2/3,
/// 0.9502(22) (1.7%) at 1/2; pure 3-spin 3.9% and 2.9% (README, "A calibration where the limit
/// is known").
#[test]
fn iamp_at_one_step_falls_short_where_the_limit_is_known() {
    let w = Work::new();
    let (e, se) = committed_fit(&w, "cube-mixture-iamp", "iamp", &["--omega", "fit"], 7);
    assert!(e <= ALG_MIX + 2.0 * se, "ω fitted: e∞ = {e} ± {se}");
    for omega in ["0.6666666666666666", "0.5"] {
        let args = ["--omega", omega];
        let (m, sm) = committed_fit(&w, "cube-mixture-iamp", "iamp", &args, 7);
        let (p, sp) = committed_fit(&w, "cube-pure3-iamp", "iamp", &args, 7);
        let (short_m, short_p) = (1.0 - m / ALG_MIX, 1.0 - p / ALG_PURE3);
        let (se_m, se_p) = (sm / ALG_MIX, sp / ALG_PURE3);
        eprintln!(
            "ω = {omega}: mixture {m} ± {sm} ({short_m}), pure 3-spin {p} ± {sp} ({short_p})"
        );
        assert!(
            m < ALG_MIX - 4.0 * sm,
            "ω = {omega}: mixture e∞ = {m} ± {sm}"
        );
        assert!(
            short_p - short_m > 2.0 * (se_m * se_m + se_p * se_p).sqrt(),
            "ω = {omega}: shortfalls {short_m} ± {se_m} and {short_p} ± {se_p}"
        );
    }
}

/// Incremental AMP on SK at four time steps, the committed study `results/sk-iamp-steps`
/// (n = 250 … 8000, 16 instances; the replay test recomputes a sample of it from its spec).
/// On SK the threshold is the Parisi value (believed: no overlap gap; Montanari 2019,
/// arXiv:1812.10897), so no fit may exceed it by more than 2 of its standard errors (Huang &
/// Sellke 2021, arXiv:2110.07847: Lipschitz algorithms stay below ALG) — with the exponent
/// fitted. With the exponent fixed at 2/3 the fits are tight, a halved step gains from 0.02 to
/// 0.01, and every step's e∞ stays at least 3 standard errors below the threshold. With the
/// exponent 1/2 that the pure 3-spin study uses (the summed χ² of the four steps within 1 of its
/// least, checked here too) the smallest step lies within 2 standard errors of the threshold:
/// the same analysis recovers the limit where it is known. Measured at 2/3: 0.7369, 0.7493,
/// 0.7528, 0.7585; at 1/2: 0.7384, 0.7516, 0.7554, 0.7625(13) (README, "The same question on
/// SK").
#[test]
fn iamp_on_sk_reaches_the_threshold_at_the_shared_exponent() {
    let w = Work::new();
    let labels = ["iamp-0.02", "iamp-0.01", "iamp-0.005", "iamp-0.0025"];
    let fit = |omega: &str| {
        labels.map(|label| committed_fit(&w, "sk-iamp-steps", label, &["--omega", omega], 6))
    };
    for (e, se) in fit("fit") {
        assert!(e <= PARISI + 2.0 * se, "ω fitted: e∞ = {e} ± {se}");
    }
    let fixed = fit("0.6666666666666666");
    eprintln!("ω = 2/3: {fixed:?}");
    assert!(
        fixed[1].0 - fixed[0].0 > 4.0 * (fixed[0].1 + fixed[1].1),
        "{fixed:?}"
    );
    for (e, se) in fixed {
        assert!(e < PARISI - 3.0 * se, "ω = 2/3: e∞ = {e} ± {se}");
    }
    let studies = labels.map(|l| ("sk-iamp-steps", l));
    assert_half_is_a_shared_exponent(&w, &studies, "8000");
    let (e, se) = fit("0.5")[3];
    eprintln!("ω = 1/2, δ = 0.0025: {e} ± {se}");
    assert!((e - PARISI).abs() <= 2.0 * se, "ω = 1/2: e∞ = {e} ± {se}");
}

/// The pure 3-spin cube at three steps δ = 0.01, 0.005, 0.0025 on the same 32 instances and
/// sizes n = 200 … 1000 (`results/cube-pure3-iamp`, `…-half-step`, `…-quarter-step`), each
/// extrapolated to n → ∞ first, as the theorem orders the limits (El Alaoui, Montanari & Sellke
/// 2021, arXiv:2001.00904, Theorem 3). Checked:
/// - the exponent: the three series' summed χ² at ω = 1/2 lies within 1 of its least over
///   ω = 0.3, 0.4, … 0.8 (one ω shared by the steps; `scripts/joint-omega.py` scans it finely:
///   best 0.44, within 1 for 0.31 … 0.58), and ω = 1/2 is also the rate at which AMP's
///   empirical averages concentrate on their state evolution (Rush & Venkataramanan 2018,
///   arXiv:1606.01800);
/// - at ω = 1/2 halving the step from 0.01 gains by more than 4 combined standard errors, no
///   step's e∞ exceeds ALG by 2 of its standard errors (Huang & Sellke 2021, arXiv:2110.07847:
///   at a fixed step iAMP is Lipschitz), every e∞ lies 4 below the Parisi value, and the
///   smallest step's lies within 2 of ALG: the acceptance check of iAMP reaching ALG;
/// - the exponent matters: with ω = 2/3 (Δχ² = +2.6) the smallest step lies 4 standard errors
///   below ALG, so the claim rests on the exponent the data prefer, as the README says.
///
/// Measured at ω = 1/2: 0.7787(24), 0.7979(24), 0.8016(19); at 2/3: 0.7700(18), 0.7873(18),
/// 0.7911(14). The standard error is the larger of the fit's and the bootstrap's.
#[test]
fn iamp_on_the_pure_3_spin_cube_reaches_the_threshold_as_the_step_shrinks() {
    let w = Work::new();
    let studies = [
        ("cube-pure3-iamp", "iamp"),
        ("cube-pure3-iamp-half-step", "iamp-0.005"),
        ("cube-pure3-iamp-quarter-step", "iamp-0.0025"),
    ];
    let at = |omega: &str| {
        studies.map(|(folder, label)| {
            committed_fit(&w, folder, label, &["--omega", omega, "--max-n", "1000"], 6)
        })
    };
    assert_half_is_a_shared_exponent(&w, &studies, "1000");
    let half = at("0.5");
    eprintln!("ω = 1/2: {half:?}; ALG {ALG_PURE3}, Parisi {PARISI_PURE3}");
    let (a, b) = (half[0], half[1]);
    assert!(b.0 - a.0 > 4.0 * (a.1 * a.1 + b.1 * b.1).sqrt(), "{half:?}");
    for (e, se) in half {
        assert!(
            e <= ALG_PURE3 + 2.0 * se,
            "ω = 1/2: e∞ = {e} ± {se} above ALG"
        );
        assert!(e < PARISI_PURE3 - 4.0 * se, "ω = 1/2: e∞ = {e} ± {se}");
    }
    let (e, se) = half[2];
    assert!(
        (e - ALG_PURE3).abs() <= 2.0 * se,
        "ω = 1/2, δ = 0.0025: {e} ± {se}"
    );
    let (e, se) = at("0.6666666666666666")[2];
    assert!(e < ALG_PURE3 - 4.0 * se, "ω = 2/3, δ = 0.0025: {e} ± {se}");
}
