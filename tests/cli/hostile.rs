//! Hostile specs: the parser, validation, expansion and memory check never panic, whatever
//! the text. The suite runs a few thousand cases per strategy; `scripts/fuzz-specs.sh` runs
//! a million (set `KILN_FUZZ_CASES`).

use crate::util::SMALL;
use kiln::exec::memory;
use kiln::spec::{self, plan};
use proptest::prelude::*;

fn cases() -> u32 {
    std::env::var("KILN_FUZZ_CASES")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(3000)
}

/// Everything kiln does with a spec before running it. Must not panic.
fn exercise(text: &str) {
    if let Ok(s) = spec::parse(text, "fuzz.toml") {
        // Expansion is exercised for plans small enough to expand quickly.
        let cells = s.sizes.len() * s.seeds.len() * s.epsilons.len() * s.algorithms.len();
        if cells <= 5_000 {
            let p = plan::expand(&s);
            assert_eq!(p.cells.len(), cells);
        }
        let _ = memory::cells_that_fit(&s, Some(1 << 30));
        let _ = memory::cells_that_fit(&s, None);
    }
}

/// Characters that make TOML structure.
const ALPHABET: &[u8] = b"[]=\"'.,-+_#{} \n\t0123456789eE.xabcdefgiklmnopqrstuvwyz";

fn mutation() -> impl Strategy<Value = String> {
    let edit = (
        0usize..SMALL.len(),
        0usize..40,
        proptest::collection::vec(0usize..ALPHABET.len(), 0..12),
        0u8..4,
    );
    proptest::collection::vec(edit, 1..6).prop_map(|edits| {
        let mut t = SMALL.as_bytes().to_vec();
        for (at, len, ins, op) in edits {
            let at = at.min(t.len());
            let end = (at + len).min(t.len());
            let bytes: Vec<u8> = ins.iter().map(|&i| ALPHABET[i]).collect();
            match op {
                0 => {
                    t.drain(at..end);
                }
                1 => {
                    t.splice(at..at, bytes);
                }
                2 => {
                    t.splice(at..end, bytes);
                }
                _ => {
                    let piece = t[at..end].to_vec();
                    t.splice(at..at, piece);
                }
            }
        }
        String::from_utf8_lossy(&t).into_owned()
    })
}

/// Numbers at the edges, put where numbers go.
fn extreme_values() -> impl Strategy<Value = String> {
    let v = prop_oneof![
        Just("0".to_string()),
        Just("-1".to_string()),
        Just("1".to_string()),
        Just("2".to_string()),
        Just("9223372036854775807".to_string()),
        Just("-9223372036854775808".to_string()),
        Just("1e308".to_string()),
        Just("nan".to_string()),
        Just("inf".to_string()),
        Just("-inf".to_string()),
        Just("0.999999999999".to_string()),
        Just("[]".to_string()),
        Just("\"\"".to_string()),
        Just("\"0..0\"".to_string()),
        Just("\"5..99999999999999\"".to_string()),
        Just("[1, 1]".to_string()),
        Just("{}".to_string()),
        any::<i64>().prop_map(|x| x.to_string()),
        any::<f64>().prop_map(|x| format!("{x:?}")),
    ];
    (v.clone(), v.clone(), v.clone(), v.clone(), v).prop_map(|(a, b, c, d, e)| {
        SMALL
            .replace("[16, 32]", &format!("[{a}, 16]"))
            .replace("seeds = 3", &format!("seeds = {b}"))
            .replace("0.1]", &format!("{c}]"))
            .replace("sweeps = 20", &format!("sweeps = {d}"))
            .replace("[0.1, 3.0]", &format!("[{e}, 3.0]"))
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: cases(), failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn arbitrary_text_never_panics(text in "\\PC{0,300}") {
        exercise(&text);
    }

    #[test]
    fn mutated_specs_never_panic(text in mutation()) {
        exercise(&text);
    }

    #[test]
    fn extreme_values_never_panic(text in extreme_values()) {
        exercise(&text);
    }
}
