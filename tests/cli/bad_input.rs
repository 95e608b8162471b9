//! Every kind of bad input: one clear message naming file, line and key, exit status 2, and
//! nothing written.

use crate::util::{SMALL, Work, stderr};

/// Runs `kiln run` and `kiln check` on a bad spec; both must refuse with status 2, print
/// every expected fragment, and leave no results or cache behind.
fn refuse(text: &str, expected: &[&str]) {
    let w = Work::new();
    let spec = w.spec("bad.toml", text);
    for cmd in ["run", "check"] {
        let o = w.kiln(&[cmd, spec.to_str().unwrap()]);
        let err = stderr(&o);
        assert_eq!(
            o.status.code(),
            Some(2),
            "{cmd}: status {:?}\n{err}",
            o.status
        );
        for e in expected {
            assert!(err.contains(e), "{cmd}: expected {e:?} in:\n{err}");
        }
        assert!(err.contains("bad.toml"), "{cmd}: file not named:\n{err}");
        assert!(err.contains("hint:"), "{cmd}: no hint:\n{err}");
        assert_eq!(
            err.matches("error:").count(),
            1,
            "{cmd}: one message:\n{err}"
        );
        assert!(!w.path().join("results").exists(), "{cmd} wrote results");
    }
}

#[test]
fn unknown_key_suggests_the_closest() {
    refuse(
        &SMALL.replace("sizes = [16, 32]", "sizs = [16, 32]"),
        &[
            "line 11",
            "key `sweep.sizs`",
            "unknown key `sizs`",
            "did you mean `sizes`?",
        ],
    );
}

#[test]
fn unknown_table() {
    refuse(
        &SMALL.replace("[sweep]", "[sweeps]"),
        &[
            "line 10",
            "key `sweeps`",
            "unknown key `sweeps`",
            "did you mean `sweep`?",
        ],
    );
}

#[test]
fn wrong_type() {
    refuse(
        &SMALL.replace("sizes = [16, 32]", "sizes = \"big\""),
        &[
            "line 11",
            "key `sweep.sizes`",
            "the text \"big\" where a list [ … ] is expected",
        ],
    );
    // Inside a list, in the user's words too.
    refuse(
        &SMALL.replace("sizes = [16, 32]", "sizes = [16, \"x\"]"),
        &["line 11", "the text \"x\" is not a whole number"],
    );
}

/// Problems in independent parts of a spec are reported together (one run, not one per
/// fix), each located, with a count; exit 2 and nothing written.
#[test]
fn every_problem_at_once() {
    let w = Work::new();
    let text = SMALL
        .replace("sizes = [16, 32]", "sizes = [16, \"x\"]")
        .replace("seeds = 3", "seeds = \"0..=3\"")
        .replace("kind = \"descent\"", "kind = \"descnt\"")
        .replace("name = \"small\"", "name = \"a b\"");
    let spec = w.spec("bad.toml", &text);
    let o = w.kiln(&["check", spec.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    for want in [
        "key `experiment.name`",
        "key `sweep.sizes`",
        "key `sweep.seeds`",
        "b excluded",
        "key `algorithm[1].kind`",
        "did you mean `descent`?",
        "(4 problems in this spec)",
    ] {
        assert!(err.contains(want), "{want:?} not in:\n{err}");
    }
    assert_eq!(err.matches("error:").count(), 4, "{err}");
    assert!(!w.path().join("results").exists());
}

#[test]
fn size_too_small() {
    refuse(
        &SMALL.replace("sizes = [16, 32]", "sizes = [16, 1]"),
        &[
            "line 11",
            "key `sweep.sizes`",
            "size 1 is too small",
            "at least 2",
        ],
    );
}

#[test]
fn zero_seeds() {
    refuse(
        &SMALL.replace("seeds = 3", "seeds = 0"),
        &[
            "line 12",
            "key `sweep.seeds`",
            "seeds = 0 gives no instances",
        ],
    );
}

#[test]
fn epsilon_out_of_range() {
    for bad in ["1.0", "-0.1", "1.5"] {
        refuse(
            &SMALL.replace("epsilons = [0.0, 0.1]", &format!("epsilons = [0.0, {bad}]")),
            &["line 13", "key `sweep.epsilons`", "outside [0, 1)"],
        );
    }
}

#[test]
fn zero_sweeps() {
    refuse(
        &SMALL.replace("sweeps = 20", "sweeps = 0"),
        &[
            "line 23",
            "key `algorithm[2].sweeps`",
            "0 is not allowed",
            "≥ 1",
        ],
    );
}

#[test]
fn beta_not_increasing() {
    refuse(
        &SMALL.replace("beta = [0.1, 3.0]", "beta = [3.0, 0.1]"),
        &[
            "line 24",
            "key `algorithm[2].beta`",
            "beta is not increasing: 3 then 0.1",
        ],
    );
}

/// `beta` is one number for amp and a schedule for annealing: each form is refused where it
/// does not apply, and a setting of another kind (here `steps`, once silently ignored on
/// non-hessian kinds) is refused too.
#[test]
fn beta_form_and_foreign_settings() {
    refuse(
        &SMALL.replace("beta = [0.1, 3.0]", "beta = 3.0"),
        &[
            "line 24",
            "key `algorithm[2].beta`",
            "beta = 3 is one number; this kind needs a schedule",
        ],
    );
    refuse(
        &SMALL
            .replace("kind = \"anneal\"", "kind = \"amp\"")
            .replace("sweeps = 20\n", ""),
        &[
            "key `algorithm[2].beta`",
            "this kind takes one inverse temperature, not a schedule",
        ],
    );
    refuse(
        &SMALL.replace("sweeps = 20", "steps = 20"),
        &[
            "line 23",
            "key `algorithm[2].steps`",
            "does not apply to kind `anneal`",
        ],
    );
}

#[test]
fn unknown_family() {
    refuse(
        &SMALL.replace("family = \"sk\"", "family = \"ks\""),
        &[
            "line 7",
            "key `model.family`",
            "unknown family `ks`",
            "did you mean `sk`?",
        ],
    );
}

#[test]
fn unknown_kind() {
    refuse(
        &SMALL.replace("kind = \"anneal\"", "kind = \"anneel\""),
        &[
            "line 22",
            "key `algorithm[2].kind`",
            "unknown algorithm kind `anneel`",
            "did you mean `anneal`?",
        ],
    );
}

#[test]
fn setting_of_another_kind() {
    refuse(
        &SMALL.replace("sweeps = 20", "order = \"greedy\""),
        &[
            "line 23",
            "key `algorithm[2].order`",
            "does not apply to kind `anneal`",
        ],
    );
}

#[test]
fn duplicate_labels() {
    refuse(
        &SMALL.replace("label = \"a\"", "label = \"d\""),
        &[
            "line 21",
            "key `algorithm[2].label`",
            "label `d` is already used by algorithm[1] (line 16)",
        ],
    );
}

#[test]
fn name_that_would_leave_the_results_folder() {
    refuse(
        &SMALL.replace("name = \"small\"", "name = \"../escape\""),
        &[
            "line 3",
            "key `experiment.name`",
            "cannot name a results folder",
        ],
    );
}

#[test]
fn not_toml() {
    refuse(
        &SMALL.replace("seeds = 3", "seeds = = 3"),
        &["line 12", "not valid TOML"],
    );
}

#[test]
fn too_large_for_this_machine() {
    // SK at n = 10^6 stores 8·10^12 bytes of couplings: more than any test machine has.
    refuse(
        &SMALL.replace("sizes = [16, 32]", "sizes = [16, 1000000]"),
        &[
            "line 11",
            "key `sweep.sizes`",
            "n = 1000000 needs about 7.3 TiB",
        ],
    );
}

#[test]
fn too_large_for_max_memory() {
    let w = Work::new();
    let spec = w.spec(
        "bad.toml",
        &SMALL.replace("sizes = [16, 32]", "sizes = [16, 2048]"),
    );
    let o = w.kiln(&["run", spec.to_str().unwrap(), "--max-memory", "16M"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("n = 2048 needs about 33.2 MiB of memory; 16.0 MiB is available"),
        "{err}"
    );
    assert!(!w.path().join("results").exists());
}

#[test]
fn absurd_expansion_is_refused_with_the_count() {
    refuse(
        &SMALL.replace("seeds = 3", "seeds = 1000000"),
        &["key `sweep`", "expands to 8000000 cells"],
    );
}

#[test]
fn missing_file() {
    let w = Work::new();
    let o = w.kiln(&["run", "nowhere.toml"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("spec nowhere.toml: cannot read the file"),
        "{err}"
    );
    assert!(err.contains("hint:"), "{err}");
    assert!(!w.path().join("results").exists());
}

#[test]
fn unreadable_file() {
    let w = Work::new();
    std::fs::write(w.path().join("binary.toml"), [0xff, 0xfe, 0x00, 0x41]).unwrap();
    let o = w.kiln(&["run", "binary.toml"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("spec binary.toml: cannot read the file"),
        "{err}"
    );
    assert!(!w.path().join("results").exists());
}

#[test]
fn bad_arguments_exit_2() {
    let w = Work::new();
    let o = w.kiln(&["run", "--jobs", "0"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let o = w.kiln(&["run", "--max-memory", "lots"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    let o = w.kiln(&["frobnicate"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(!w.path().join("results").exists());
}

/// A spec for one family: the [model] body and the sizes.
fn family_spec(model: &str, sizes: &str, algorithm: &str) -> String {
    format!(
        "[experiment]\nname = \"fam\"\n\n[model]\n{model}\n\n[sweep]\nsizes = {sizes}\nseeds = 2\n\n[[algorithm]]\n{algorithm}\n"
    )
}

#[test]
fn family_keys_are_required_and_refused_where_they_do_not_apply() {
    refuse(
        &family_spec("family = \"cube\"", "[16]", "kind = \"descent\""),
        &[
            "line 5",
            "key `model.xi`",
            "the `cube` family needs `xi`",
            "xi = {",
        ],
    );
    refuse(
        &family_spec("family = \"sk\"\ndegree = 3", "[16]", "kind = \"descent\""),
        &[
            "line 6",
            "key `model.degree`",
            "does not apply to the `sk` family",
        ],
    );
    refuse(
        &family_spec("family = \"regular\"", "[16]", "kind = \"descent\""),
        &["key `model.degree`", "needs `degree`"],
    );
    refuse(
        &family_spec(
            "family = \"lattice\"\ndimension = 7",
            "[8]",
            "kind = \"descent\"",
        ),
        &[
            "line 6",
            "key `model.dimension`",
            "dimension 7 is not supported",
        ],
    );
    refuse(
        &family_spec(
            "family = \"cube\"\nxi = { 1 = 0.5 }",
            "[16]",
            "kind = \"descent\"",
        ),
        &["line 6", "key `model.xi.1`", "`1` is not a degree p"],
    );
    refuse(
        &family_spec(
            "family = \"cube\"\nxi = { 3 = -1.0 }",
            "[16]",
            "kind = \"descent\"",
        ),
        &["key `model.xi.3`", "not a number ≥ 0"],
    );
}

/// The uniform field: a number, |h| ≤ 100, and only on the ±1 families.
#[test]
fn field_is_checked() {
    refuse(
        &family_spec(
            "family = \"sphere\"\nxi = { 3 = 1.0 }\nfield = 0.5",
            "[16]",
            "kind = \"gradient\"",
        ),
        &[
            "line 7",
            "key `model.field`",
            "does not apply to the `sphere` family",
        ],
    );
    refuse(
        &family_spec(
            "family = \"sk\"\nfield = \"up\"",
            "[16]",
            "kind = \"descent\"",
        ),
        &["key `model.field`", "expected a number"],
    );
    refuse(
        &family_spec("family = \"sk\"\nfield = 1e9", "[16]", "kind = \"descent\""),
        &["key `model.field`", "out of range"],
    );
}

#[test]
fn family_sizes_and_couplings_are_checked() {
    refuse(
        &family_spec(
            "family = \"sk\"\ncouplings = \"cut\"",
            "[16]",
            "kind = \"descent\"",
        ),
        &[
            "line 6",
            "key `model.couplings`",
            "`cut` does not apply to the `sk` family",
        ],
    );
    refuse(
        &family_spec(
            "family = \"regular\"\ndegree = 3",
            "[15]",
            "kind = \"descent\"",
        ),
        &["key `sweep.sizes`", "n·d = 15·3 is odd", "even n"],
    );
    refuse(
        &family_spec(
            "family = \"lattice\"\ndimension = 2",
            "[2]",
            "kind = \"descent\"",
        ),
        &["key `sweep.sizes`", "side length L = 2 is too small"],
    );
    refuse(
        &family_spec(
            "family = \"cube\"\nxi = { 4 = 1.0 }",
            "[3]",
            "kind = \"descent\"",
        ),
        &["key `sweep.sizes`", "smaller than the largest degree p = 4"],
    );
}

#[test]
fn algorithms_are_matched_to_families() {
    refuse(
        &family_spec(
            "family = \"sphere\"\nxi = { 3 = 1.0 }",
            "[16]",
            "kind = \"descent\"",
        ),
        &[
            "key `algorithm[1].kind`",
            "`descent` cannot run on the `sphere` family",
            "kinds for this family: `gradient`, `hessian`",
        ],
    );
    refuse(
        &family_spec(
            "family = \"cube\"\nxi = { 3 = 1.0 }",
            "[16]",
            "kind = \"spectral\"",
        ),
        &["`spectral` cannot run on the `cube` family", "quadratic"],
    );
    refuse(
        &family_spec("family = \"sk\"", "[16]", "kind = \"hessian\""),
        &["`hessian` cannot run on the `sk` family"],
    );
    // Incremental AMP needs a dense cube model (ξ), and a start overlap in (0, 0.5].
    refuse(
        &family_spec(
            "family = \"regular\"\ndegree = 3",
            "[16]",
            "kind = \"iamp\"",
        ),
        &["`iamp` cannot run on the `regular` family", "dense model"],
    );
    refuse(
        &family_spec(
            "family = \"cube\"\nxi = { 3 = 1.0 }",
            "[16]",
            "kind = \"iamp\"\nstart = 0",
        ),
        &["start = 0 is not an overlap in (0, 0.5]", "norm²"],
    );
    refuse(
        &family_spec(
            "family = \"sk\"",
            "[16]",
            "kind = \"iamp\"\norder = \"best\"",
        ),
        &["unknown order parameter `best`", "extended"],
    );
    refuse(
        &family_spec("family = \"regular\"\ndegree = 3", "[16]", "kind = \"amp\""),
        &["`amp` cannot run on the `regular` family"],
    );
}

/// Hostile inputs are refused at once with exit 2 and nothing written (each of these used to
/// block, grow without bound or run for minutes): a device that never ends, a FIFO nobody
/// writes to, a folder, a spec file over the size cap, and a job count far beyond any machine.
#[test]
fn hostile_files_and_job_counts_are_refused_up_front() {
    let w = Work::new();
    let fifo = w.path().join("pipe.toml");
    let made = std::process::Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .is_ok_and(|s| s.success());
    let big = w.spec(
        "big.toml",
        &format!(
            "{SMALL}\n# {}\n",
            "x".repeat(kiln::spec::MAX_SPEC_BYTES as usize)
        ),
    );
    let mut cases: Vec<(String, &str)> = vec![
        ("/dev/zero".into(), "not a regular file"),
        (w.path().display().to_string(), "not a regular file"),
        (big.display().to_string(), "more than the"),
    ];
    if made {
        cases.push((fifo.display().to_string(), "not a regular file"));
    }
    for (path, expected) in &cases {
        for cmd in ["check", "run"] {
            let o = w.kiln(&[cmd, path]);
            assert_eq!(o.status.code(), Some(2), "{cmd} {path}: {}", stderr(&o));
            assert!(
                stderr(&o).contains(expected),
                "{cmd} {path}: {}",
                stderr(&o)
            );
            assert!(stderr(&o).contains("hint:"), "{}", stderr(&o));
        }
    }
    let spec = w.spec("ok.toml", SMALL);
    let o = w.kiln(&["run", spec.to_str().unwrap(), "--jobs", "100000"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("at most 1024"), "{}", stderr(&o));
    assert!(
        !w.path().join("results").exists(),
        "a refusal wrote results"
    );
}
