//! Coverage-guided fuzzing of spec parsing, validation, expansion and the memory check:
//! `cargo fuzz run spec` from the repository root. Any panic is a bug.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if let Ok(s) = kiln::spec::parse(text, "fuzz.toml") {
        let cells = s.sizes.len() * s.seeds.len() * s.epsilons.len() * s.algorithms.len();
        if cells <= 5_000 {
            let _ = kiln::spec::plan::expand(&s);
        }
        let _ = kiln::exec::memory::check(&s, Some(1 << 30));
    }
});
