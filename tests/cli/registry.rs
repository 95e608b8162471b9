//! The registries: an algorithm kind and a model family added from outside the crate through
//! the public registration alone are accepted by the spec parser, run end to end, and show in
//! the reference and the listing; the README's reference is the registries' text.

use crate::util::Work;
use kiln::algo::{AlgoError, AlgoSpec, Algorithm, Info, Key, Kind, Output};
use kiln::cell::Canon;
use kiln::model::{Instance, ModelSpec};
use kiln::rng::Stream;
use kiln::spec::{Settings, SpecError};

/// A toy kind: all spins +1, then `flips` spins chosen by the algorithm stream turned to −1.
#[derive(Debug)]
struct Flipper {
    flips: u64,
}

impl Algorithm for Flipper {
    fn kind(&self) -> &'static str {
        TOY.name
    }
    fn revision(&self) -> u32 {
        1
    }
    fn canon(&self, c: Canon) -> Canon {
        c.with("flips", self.flips)
    }
    fn work_bytes(&self, n: u64) -> u128 {
        n as u128
    }
    fn cost(&self, n: u64, _flip: f64) -> f64 {
        n as f64
    }
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        (!m.family.spins()).then_some("it sets ±1 spins")
    }
    fn run(&self, inst: &Instance, rng: &mut Stream) -> Result<Output, AlgoError> {
        let n = inst.n();
        let mut spins = vec![1i8; n];
        for _ in 0..self.flips {
            spins[rng.below(n as u64) as usize] = -1;
        }
        Ok(Output {
            spins,
            point: None,
            info: Info {
                converged: true,
                ..Info::default()
            },
        })
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}

const TOY: Kind = Kind {
    name: "toy-flipper",
    summary: "A test kind: all spins up, then a few turned down at random.",
    keys: &[Key {
        name: "flips",
        ty: "integer ≥ 1",
        default: "3",
        doc: "how many random spins are turned down",
    }],
    parse: parse_toy,
};

fn parse_toy(s: &Settings<'_>) -> Result<AlgoSpec, SpecError> {
    Ok(AlgoSpec::new(Flipper {
        flips: s.count("flips", 1000)?.unwrap_or(3),
    }))
}

/// Runs `kiln run <spec> --quiet` in this process (where the toys are registered), with the
/// results under the workspace; asserts its exit status; returns the results folder.
fn run_in_process_expecting(
    spec: &std::path::Path,
    w: &Work,
    status: std::process::ExitCode,
) -> std::path::PathBuf {
    let results = w.path().join("results");
    let code = kiln::cli::main_from([
        "kiln",
        "run",
        spec.to_str().unwrap(),
        "--results",
        results.to_str().unwrap(),
        "--quiet",
    ]);
    assert_eq!(format!("{code:?}"), format!("{status:?}"));
    results
}

/// [`run_in_process_expecting`] success.
fn run_in_process(spec: &std::path::Path, w: &Work) -> std::path::PathBuf {
    run_in_process_expecting(spec, w, std::process::ExitCode::SUCCESS)
}

fn register_toy() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| kiln::algo::register(TOY).expect("the toy name is free"));
}

/// Registered from the test crate, the toy kind is parsed (its key, its refusals), runs a
/// whole spec in-process through the same command the binary runs, lands in the table, and
/// shows in `kiln kinds` and the Markdown reference with no other edit.
#[test]
fn a_kind_registered_from_outside_runs_end_to_end() {
    register_toy();
    assert!(
        kiln::algo::register(TOY).is_err(),
        "a name is registered once"
    );
    let w = Work::new();
    let text = crate::util::SMALL.replace(
        "kind = \"descent\"\norder = \"random\"",
        "kind = \"toy-flipper\"\nflips = 5",
    );
    let spec = w.spec("toy.toml", &text);
    let parsed = kiln::spec::load(&spec).expect("the toy spec parses");
    assert_eq!(parsed.algorithms[0].algo.kind(), "toy-flipper");
    assert!(parsed.algorithms[0].algo.settings().contains("\"flips\":5"));

    // Its own key is checked like a built-in one, with file, line and key.
    let bad = w.spec("bad.toml", &text.replace("flips = 5", "flips = 0"));
    let e = kiln::spec::load(&bad).unwrap_err().to_string();
    assert!(
        e.contains("algorithm[1].flips") && e.contains("line 18"),
        "{e}"
    );
    let bad = w.spec("bad2.toml", &text.replace("flips = 5", "sweeps = 5"));
    let e = kiln::spec::load(&bad).unwrap_err().to_string();
    assert!(e.contains("does not apply to kind `toy-flipper`"), "{e}");

    let results = run_in_process(&spec, &w);
    let table = results.join("small/cells.parquet");
    let df = kiln::store::table::read(&table).expect("the table reads");
    let kinds: Vec<String> = df
        .column("kind")
        .expect("a kind column")
        .str()
        .expect("strings")
        .iter()
        .map(|k| k.unwrap_or_default().to_string())
        .collect();
    let toy = kinds.iter().filter(|k| k.as_str() == "toy-flipper").count();
    // 2 sizes × 3 seeds × 2 ε levels.
    assert_eq!(toy, 12, "{kinds:?}");

    let (fams, all) = (kiln::model::families(), kiln::algo::kinds());
    assert!(kiln::spec::reference(&fams, &all).contains("#### `kind = \"toy-flipper\"`"));
    assert!(kiln::spec::listing(&fams, &all).contains("toy-flipper"));
    assert!(kiln::algo::kinds_for(&parsed.model).contains(&"toy-flipper"));
}

/// The README's reference section is exactly what `kiln kinds --markdown` prints for the kinds
/// kiln ships, so the documentation cannot drift from the parser.
#[test]
fn readme_reference_is_the_registry() {
    let readme = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md"))
        .expect("README.md");
    let begin = "<!-- reference:begin -->\n";
    let start = readme.find(begin).expect("begin marker") + begin.len();
    let end = readme.find("<!-- reference:end -->").expect("end marker");
    assert_eq!(
        &readme[start..end],
        kiln::spec::reference(kiln::model::builtin(), kiln::algo::builtin()),
        "README.md's reference section is stale: paste `kiln kinds --markdown` between the markers"
    );
}

/// Every key a kind declares is one its parser reads: a value of the wrong type is refused for
/// each, which a key the parser forgot would silently accept.
#[test]
fn every_declared_key_is_read() {
    for k in kiln::algo::builtin() {
        for key in k.keys {
            let text = format!(
                "[experiment]\nname = \"k\"\n[model]\nfamily = \"sk\"\n[sweep]\nsizes = [8]\nseeds = 1\n\
                 [[algorithm]]\nkind = \"{}\"\n{} = {{ wrong = 1 }}\n",
                k.name, key.name
            );
            let e = kiln::spec::parse(&text, "k.toml");
            let e = match e {
                Err(e) => e.to_string(),
                Ok(_) => panic!("`{}.{}` accepted a table", k.name, key.name),
            };
            assert!(
                e.contains(&format!("algorithm[1].{}", key.name)),
                "{}.{}: {e}",
                k.name,
                key.name
            );
        }
    }
}

/// A toy family: the Curie–Weiss model in a random field, H(σ) = (J/2n)(Σσ)² + Σ h_i σ_i with
/// h_i standard normal from the instance streams; its correlated copy moves each field to
/// (1 − ε)h_i + sqrt(1 − (1 − ε)²) g_i, g_i from the perturbation streams.
#[derive(Debug)]
struct FieldMagnet {
    coupling: f64,
}

struct FieldMagnetInstance {
    j: f64,
    h: Vec<f64>,
}

impl kiln::model::SpinModel for FieldMagnetInstance {
    fn n(&self) -> usize {
        self.h.len()
    }
    fn fields(&self, s: &[i8], f: &mut [f64]) {
        let n = s.len() as f64;
        let m: f64 = s.iter().map(|&x| x as f64).sum();
        for i in 0..s.len() {
            f[i] = self.h[i] + self.j / n * (m - s[i] as f64);
        }
    }
    fn energy(&self, s: &[i8]) -> f64 {
        let n = s.len() as f64;
        let m: f64 = s.iter().map(|&x| x as f64).sum();
        self.j / (2.0 * n) * (m * m - n)
            + s.iter()
                .zip(&self.h)
                .map(|(&x, h)| x as f64 * h)
                .sum::<f64>()
    }
    fn flip(&self, s: &mut [i8], f: &mut [f64], k: usize) {
        let n = s.len() as f64;
        let change = -2.0 * s[k] as f64 * self.j / n;
        s[k] = -s[k];
        for (i, fi) in f.iter_mut().enumerate() {
            if i != k {
                *fi += change;
            }
        }
    }
}

impl kiln::model::Family for FieldMagnet {
    fn name(&self) -> &'static str {
        TOY_FAMILY.name
    }
    fn revision(&self) -> u32 {
        1
    }
    fn params_canon(&self, c: Canon) -> Canon {
        c.with("coupling", self.coupling)
    }
    fn spins(&self) -> bool {
        true
    }
    fn instance_bytes(&self, n: u64) -> u128 {
        16 * n as u128
    }
    fn flip_cost(&self, n: u64) -> f64 {
        n as f64
    }
    fn sample(
        &self,
        n: usize,
        _couplings: kiln::model::Couplings,
        instance: &kiln::rng::Id,
        epsilon: f64,
    ) -> Instance {
        use kiln::rng::{Purpose, stream};
        let mut h: Vec<f64> = (0..n)
            .map(|i| stream(instance, Purpose::Couplings, i as u64).normal())
            .collect();
        if epsilon > 0.0 {
            let fresh = (1.0 - (1.0 - epsilon) * (1.0 - epsilon)).sqrt();
            for (i, x) in h.iter_mut().enumerate() {
                *x = (1.0 - epsilon) * *x
                    + fresh * stream(instance, Purpose::Perturbation, i as u64).normal();
            }
        }
        Instance::Spins(Box::new(FieldMagnetInstance {
            j: self.coupling,
            h,
        }))
    }
    fn as_any(&self) -> &dyn std::any::Any {
        self
    }
}

const TOY_FAMILY: kiln::model::FamilyEntry = kiln::model::FamilyEntry {
    name: "toy-field-magnet",
    title: "toy field magnet",
    summary: "A test family: the Curie–Weiss model in a Gaussian random field.",
    keys: &[Key {
        name: "coupling",
        ty: "number",
        default: "1.0",
        doc: "the ferromagnetic coupling J",
    }],
    couplings: &[kiln::model::Couplings::Gaussian],
    sizes: "the numbers of spins n",
    parse: |s| {
        Ok(std::sync::Arc::new(FieldMagnet {
            coupling: s.number("coupling")?.unwrap_or(1.0),
        }))
    },
};

/// Registered from the test crate, the toy family is read from `[model]` with its own key,
/// runs a spec end to end with built-in ±1 algorithms (descent, exhaustive search, annealing)
/// and the toy kind, its correlated copy moves the output, and it shows in the references
/// and the listing with no other edit; algorithms that need a gradient are refused up front.
#[test]
fn a_family_registered_from_outside_runs_end_to_end() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| kiln::model::register(TOY_FAMILY).expect("the toy family name is free"));
    register_toy();
    let w = Work::new();
    let text = "[experiment]\nname = \"magnet\"\n\n[model]\nfamily = \"toy-field-magnet\"\ncoupling = 0.5\n\n\
                [sweep]\nsizes = [10, 14]\nseeds = 3\nepsilons = [0.0, 0.3]\n\n\
                [[algorithm]]\nkind = \"descent\"\n\n[[algorithm]]\nkind = \"exhaustive\"\n\n\
                [[algorithm]]\nkind = \"anneal\"\nsweeps = 50\n\n[[algorithm]]\nkind = \"toy-flipper\"\n";
    let spec = w.spec("magnet.toml", text);
    let parsed = kiln::spec::load(&spec).expect("the toy family parses");
    assert_eq!(parsed.model.name(), "toy-field-magnet");
    assert!(parsed.model.canon().encode().contains("\"coupling\":0.5"));
    let bad = w.spec("bad.toml", &text.replace("coupling = 0.5", "degree = 3"));
    let e = kiln::spec::load(&bad).unwrap_err().to_string();
    assert!(
        e.contains("`degree` does not apply to the `toy-field-magnet` family"),
        "{e}"
    );
    let bad = w.spec("bad2.toml", &text.replace("\"descent\"", "\"spectral\""));
    let e = kiln::spec::load(&bad).unwrap_err().to_string();
    assert!(
        e.contains("cannot run on the `toy-field-magnet` family"),
        "{e}"
    );

    let results = run_in_process(&spec, &w);
    let df = kiln::store::table::read(&results.join("magnet/cells.parquet")).expect("a table");
    // 2 sizes × 3 seeds × 2 ε levels × 4 algorithms.
    assert_eq!(df.height(), 48);
    let col = |name: &str| -> Vec<f64> {
        df.column(name)
            .unwrap()
            .f64()
            .unwrap()
            .iter()
            .map(|x| x.unwrap())
            .collect()
    };
    let (energy, kinds) = (
        col("energy"),
        df.column("kind").unwrap().str().unwrap().clone(),
    );
    // Exhaustive search is exact: no other algorithm beats it on the same instance.
    let (n, seed, eps) = (
        df.column("n").unwrap().u64().unwrap().clone(),
        df.column("seed").unwrap().u64().unwrap().clone(),
        col("epsilon"),
    );
    for i in 0..df.height() {
        if eps[i] != 0.0 {
            continue;
        }
        let best = (0..df.height())
            .find(|&j| {
                kinds.get(j) == Some("exhaustive")
                    && n.get(j) == n.get(i)
                    && seed.get(j) == seed.get(i)
                    && eps[j] == 0.0
            })
            .map(|j| energy[j])
            .expect("an exact row");
        assert!(energy[i] <= best + 1e-12, "row {i} beats exhaustive search");
    }

    let fams = kiln::model::families();
    let algs = kiln::algo::kinds();
    assert!(kiln::spec::reference(&fams, &algs).contains("#### `family = \"toy-field-magnet\"`"));
    assert!(kiln::spec::listing(&fams, &algs).contains("toy-field-magnet"));
}

/// What a settings-free test kind implements the same way whatever it computes.
macro_rules! settings_free_toy {
    ($kind:expr) => {
        fn kind(&self) -> &'static str {
            $kind.name
        }
        fn revision(&self) -> u32 {
            1
        }
        fn canon(&self, c: Canon) -> Canon {
            c
        }
        fn work_bytes(&self, n: u64) -> u128 {
            8 * n as u128
        }
        fn cost(&self, n: u64, _flip: f64) -> f64 {
            n as f64
        }
        fn as_any(&self) -> &dyn std::any::Any {
            self
        }
    };
}

/// A test kind for the sphere that returns a point of NaNs: the energy per spin is not a number.
#[derive(Debug)]
struct NanPoint;

impl Algorithm for NanPoint {
    settings_free_toy!(NAN);
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        m.family
            .spins()
            .then_some("it returns a point on the sphere")
    }
    fn run(&self, inst: &Instance, _rng: &mut Stream) -> Result<Output, AlgoError> {
        let n = inst.n();
        Ok(Output {
            spins: vec![1; n],
            point: Some(vec![f64::NAN; n]),
            info: Info::default(),
        })
    }
}

const NAN: Kind = Kind {
    name: "toy-nan",
    summary: "A test kind: a point of NaNs on the sphere.",
    keys: &[],
    parse: |_| Ok(AlgoSpec::new(NanPoint)),
};

/// A cell whose algorithm produced a non-finite energy per spin is a failed cell with the
/// reason: the run exits 1, no record is kept (so no later run reads it as damage), the
/// failure note says why, and the other algorithm's cells are done and tabled.
#[test]
fn a_non_finite_energy_is_a_failed_cell() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| kiln::algo::register(NAN).expect("the name is free"));
    let w = Work::new();
    let spec = w.spec(
        "s.toml",
        r#"[experiment]
name = "nan"
[model]
family = "sphere"
xi = { 3 = 1.0 }
[sweep]
sizes = [20]
seeds = 2
[[algorithm]]
kind = "toy-nan"
[[algorithm]]
kind = "gradient"
"#,
    );
    let results = run_in_process_expecting(&spec, &w, std::process::ExitCode::from(1));
    let df = kiln::store::table::read(&results.join("nan/cells.parquet")).unwrap();
    assert_eq!(df.height(), 2, "the gradient cells are tabled");
    let mut notes = Vec::new();
    for shard in std::fs::read_dir(results.join(".cache/failed")).unwrap() {
        for f in std::fs::read_dir(shard.unwrap().path()).unwrap() {
            notes.push(std::fs::read_to_string(f.unwrap().path()).unwrap());
        }
    }
    assert_eq!(notes.len(), 2, "{notes:?}");
    assert!(
        notes[0].contains("toy-nan produced a non-finite energy per spin (NaN"),
        "{notes:?}"
    );
    let records: usize = std::fs::read_dir(results.join(".cache/records"))
        .unwrap()
        .map(|s| std::fs::read_dir(s.unwrap().path()).unwrap().count())
        .sum();
    assert_eq!(records, 2, "only the gradient cells have records");
}

/// A test kind whose output is ±σ₀ for a fixed pattern σ₀, the sign being that of H(σ₀) on
/// the instance it is given: on a correlated copy the output is the same state or its global
/// flip, nothing else.
#[derive(Debug)]
struct SignOfPattern;

impl Algorithm for SignOfPattern {
    settings_free_toy!(SIGN);
    fn unsupported(&self, m: &ModelSpec) -> Option<&'static str> {
        (!m.family.spins()).then_some("it sets ±1 spins")
    }
    fn run(&self, inst: &Instance, _rng: &mut Stream) -> Result<Output, AlgoError> {
        let pattern: Vec<i8> = (0..inst.n())
            .map(|i| if i % 3 == 0 { -1 } else { 1 })
            .collect();
        let s = if inst.energy(&pattern) >= 0.0 { 1 } else { -1 };
        Ok(Output {
            spins: pattern.iter().map(|&x| s * x).collect(),
            point: None,
            info: Info::default(),
        })
    }
}

const SIGN: Kind = Kind {
    name: "toy-sign",
    summary: "A test kind: a fixed pattern times the sign of its energy.",
    keys: &[],
    parse: |_| Ok(AlgoSpec::new(SignOfPattern)),
};

/// Stability modulo the symmetry: an output that only changes by a global flip on the
/// correlated copy has `distance_sym` = 0 and `overlap_sym` = 1 on SK (σ and −σ are one
/// state), while the raw columns show the flips (distance 2, overlap −1). On the pure 3-spin
/// cube, where H(−σ) = −H(σ), the `_sym` columns are the raw ones.
#[test]
fn stability_is_measured_modulo_the_global_flip() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| kiln::algo::register(SIGN).expect("the name is free"));
    for (model, symmetric) in [
        ("family = \"sk\"", true),
        ("family = \"cube\"\nxi = { 3 = 1.0 }", false),
    ] {
        let w = Work::new();
        let spec = w.spec(
            "s.toml",
            &format!(
                "[experiment]\nname = \"flip\"\n[model]\n{model}\n[sweep]\nsizes = [30]\nseeds = 24\nepsilons = [0.0, 0.9]\n[[algorithm]]\nkind = \"toy-sign\"\n"
            ),
        );
        let results = run_in_process(&spec, &w);
        let df = kiln::store::table::read(&results.join("flip/cells.parquet")).unwrap();
        let col = |c: &str| -> Vec<f64> {
            df.column(c)
                .unwrap()
                .f64()
                .unwrap()
                .into_no_null_iter()
                .collect()
        };
        let (eps, d, dsym, q, qsym) = (
            col("epsilon"),
            col("distance"),
            col("distance_sym"),
            col("overlap"),
            col("overlap_sym"),
        );
        let perturbed: Vec<usize> = (0..eps.len()).filter(|&i| eps[i] > 0.0).collect();
        assert_eq!(perturbed.len(), 24);
        let flips = perturbed.iter().filter(|&&i| d[i] == 2.0).count();
        assert!(flips > 0, "{model}: no sign changed in 24 seeds");
        assert!(perturbed.iter().all(|&i| d[i] == 0.0 || d[i] == 2.0));
        for &i in &perturbed {
            if symmetric {
                assert_eq!((dsym[i], qsym[i]), (0.0, 1.0), "{model}: row {i}");
            } else {
                assert_eq!((dsym[i], qsym[i]), (d[i], q[i]), "{model}: row {i}");
            }
        }
    }
}
