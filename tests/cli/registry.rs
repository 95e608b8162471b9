//! The algorithm registry: a kind added from outside the crate through the public registration
//! alone is accepted by the spec parser, runs end to end, and shows in the reference and the
//! listing; the README's reference is the registry's text.

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

    let results = w.path().join("results");
    let code = kiln::cli::main_from([
        "kiln",
        "run",
        spec.to_str().unwrap(),
        "--results",
        results.to_str().unwrap(),
        "--quiet",
    ]);
    assert_eq!(
        format!("{code:?}"),
        format!("{:?}", std::process::ExitCode::SUCCESS)
    );
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

    let all = kiln::algo::kinds();
    assert!(kiln::algo::reference(&all).contains("#### `kind = \"toy-flipper\"`"));
    assert!(kiln::algo::listing(&all).contains("toy-flipper\n    A test kind"));
    assert!(kiln::algo::kinds_for(&parsed.model).contains(&"toy-flipper"));
}

/// The README's reference section is exactly what `kiln kinds --markdown` prints for the kinds
/// kiln ships, so the documentation cannot drift from the parser.
#[test]
fn readme_reference_is_the_registry() {
    let readme = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md"))
        .expect("README.md");
    let begin = "<!-- kinds:begin -->\n";
    let start = readme.find(begin).expect("begin marker") + begin.len();
    let end = readme.find("<!-- kinds:end -->").expect("end marker");
    assert_eq!(
        &readme[start..end],
        kiln::algo::reference(kiln::algo::builtin()),
        "README.md's kinds section is stale: paste `kiln kinds --markdown` between the markers"
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
