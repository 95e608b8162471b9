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

/// A fit of one algorithm in a committed results folder, from a copy of its table: (e∞, the
/// larger of the fit's and the bootstrap's standard error), after checking the number of sizes.
fn committed_fit(w: &Work, folder: &str, label: &str, args: &[&str], sizes: u64) -> (f64, f64) {
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
    let mut a = vec!["fit", dir.to_str().unwrap(), "--bootstrap", "300", "--json"];
    a.extend_from_slice(args);
    let o = w.kiln(&a);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let f = v["fits"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["algorithm"] == label)
        .unwrap_or_else(|| panic!("{label}: {v}"));
    assert_eq!(f["sizes"], sizes, "{f}");
    let se = f["e_inf_se"]
        .as_f64()
        .unwrap()
        .max(f["e_inf_se_bootstrap"].as_f64().unwrap());
    (f["e_inf"].as_f64().unwrap(), se)
}

/// Incremental AMP on the pure 3-spin cube, the committed study `results/cube-pure3-iamp`
/// (n = 200 … 1400, 32 instances, δ = 0.01; the replay test recomputes a sample of it from its
/// spec), fitted with the correction exponent free. No algorithm that is Lipschitz in the
/// disorder, iAMP included, exceeds the algorithmic threshold ALG (Huang & Sellke 2021,
/// arXiv:2110.07847), and ALG lies strictly below the Parisi value here (conjectured for
/// p = 3): so e∞ must not exceed ALG by more than 2 of its standard errors, and must lie
/// clearly (4 standard errors) below the Parisi value. The standard error is the larger of the
/// fit's and the bootstrap's over instances. Measured: e∞ = 0.755(9), ω = 0.94(23): below ALG
/// by 0.045, so at δ = 0.01 and these sizes iAMP does not extrapolate to ALG (El Alaoui,
/// Montanari & Sellke 2021, arXiv:2001.00904, Theorem 3: it reaches ALG as δ → 0 after
/// n → ∞); README, "Incremental AMP without a p = 2 term".
#[test]
fn iamp_on_the_pure_3_spin_cube_stays_below_the_threshold() {
    let w = Work::new();
    let (e, se) = committed_fit(&w, "cube-pure3-iamp", "iamp", &["--omega", "fit"], 7);
    eprintln!("iamp e∞ = {e} ± {se}; ALG {ALG_PURE3}, Parisi {PARISI_PURE3}");
    assert!(e <= ALG_PURE3 + 2.0 * se, "e∞ = {e} ± {se} above ALG");
    assert!(e < PARISI_PURE3 - 4.0 * se, "e∞ = {e} ± {se}");
}

/// The calibration study `results/cube-mixture-iamp`: iAMP at δ = 0.01 on ξ = q²/2 + q³/4, at the
/// pure 3-spin study's sizes (200 … 1400) and instance count (32). Here the threshold is the
/// Parisi value, and iAMP reaches it as n → ∞ and then δ → 0 (El Alaoui, Montanari & Sellke
/// 2021, arXiv:2001.00904, Theorem 3). With the exponent fixed at 2/3 or 1/2, its extrapolation
/// still falls short of the threshold by more than 4 standard errors: 3.0% and 2.1%, measured.
/// The pure 3-spin study's shortfall from its own ALG, relative to ALG, agrees with the
/// mixture's within 3 combined standard errors: 3.8% against 3.0%, and 1.7% against 2.1%,
/// measured. So at these sizes and this step, the pure 3-spin shortfall is no larger than the
/// shortfall kiln's iAMP shows where the limit is known. The standard error is the larger of
/// the fit's and the bootstrap's (300 resamplings of instances). See README, "Incremental AMP
/// without a p = 2 term".
#[test]
fn iamp_falls_as_far_short_on_pure_3_spin_as_where_the_limit_is_known() {
    let w = Work::new();
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
            (short_p - short_m).abs() <= 3.0 * (se_m * se_m + se_p * se_p).sqrt(),
            "ω = {omega}: shortfalls {short_m} ± {se_m} and {short_p} ± {se_p}"
        );
    }
}

/// Incremental AMP on SK at four time steps, the committed study `results/sk-iamp-steps`
/// (n = 250 … 8000, 16 instances; the replay test recomputes a sample of it from its spec).
/// On SK the threshold is the Parisi value (believed: no overlap gap; Montanari 2019,
/// arXiv:1812.10897), so no fit may exceed it by more than 2 of its standard errors (Huang &
/// Sellke 2021, arXiv:2110.07847: Lipschitz algorithms stay below ALG) — with the exponent
/// fitted, where the bootstrap error is 0.007 to 0.06. With the exponent fixed at 2/3 the fits
/// are tight, a halved step gains from 0.02 to 0.01, and every step's e∞ stays at least 3
/// standard errors below the threshold: at these sizes the data do not show iAMP reaching it
/// (measured: 0.7367, 0.7504, 0.7551, 0.7539; README, "The same question on SK").
#[test]
fn iamp_on_sk_approaches_but_does_not_show_the_threshold() {
    let w = Work::new();
    let fit = |omega: &str| {
        ["iamp-0.02", "iamp-0.01", "iamp-0.005", "iamp-0.0025"]
            .map(|label| committed_fit(&w, "sk-iamp-steps", label, &["--omega", omega], 6))
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
}

/// The pure 3-spin study at half the time step (`results/cube-pure3-iamp-half-step`, δ = 0.005,
/// n = 200 … 1000, the same 32 instances as `results/cube-pure3-iamp` at δ = 0.01). At a fixed
/// correction exponent (2/3, and 1/2 as SK's iAMP fits prefer) the two steps' extrapolations
/// on the same instances and sizes agree within 2 combined standard errors, and neither
/// exceeds ALG by 2 of its own (Huang & Sellke 2021, arXiv:2110.07847). Measured: 0.770(9)
/// and 0.774(4) at 2/3, 0.797(12) and 0.795(6) at 1/2 (README, "The same question on SK").
#[test]
fn halving_the_step_does_not_move_the_pure_3_spin_extrapolation() {
    let w = Work::new();
    for omega in ["0.6666666666666666", "0.5"] {
        let args = ["--omega", omega, "--max-n", "1000"];
        let (a, sa) = committed_fit(&w, "cube-pure3-iamp", "iamp", &args, 6);
        let (b, sb) = committed_fit(&w, "cube-pure3-iamp-half-step", "iamp-0.005", &args, 6);
        eprintln!("ω = {omega}: δ = 0.01 {a} ± {sa}, δ = 0.005 {b} ± {sb}");
        assert!(
            (a - b).abs() <= 2.0 * (sa * sa + sb * sb).sqrt(),
            "ω = {omega}"
        );
        assert!(
            a <= ALG_PURE3 + 2.0 * sa && b <= ALG_PURE3 + 2.0 * sb,
            "ω = {omega}"
        );
    }
}
