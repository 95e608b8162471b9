//! `kiln draft`: writes a commented starter spec for a family and a set of algorithm kinds, from
//! the same registries the parser reads (every key of the family and of each kind, with its
//! type, default and meaning, commented out where a default exists). The text is parsed before
//! it is written, so a draft is always a valid spec.

use super::{InputError, out};
use crate::algo::Key;
use clap::Args;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct DraftArgs {
    /// The model family (`kiln kinds` lists them).
    pub family: String,
    /// Algorithm kinds, comma-separated (e.g. `descent,anneal`). Default: the first two of
    /// descent, anneal, gradient, walksat and least-distance that run on the family.
    #[arg(long, short = 'a', value_name = "KIND,…", value_delimiter = ',')]
    pub algorithms: Vec<String>,
    /// The experiment's name (its results folder). Default: `<family>-study`.
    #[arg(long, value_name = "NAME")]
    pub name: Option<String>,
    /// Write the spec to this file (refused if it exists) instead of standard output.
    #[arg(long, short = 'o', value_name = "FILE")]
    pub output: Option<PathBuf>,
}

/// Kinds tried, in order, when none are given.
const FALLBACK_KINDS: [&str; 5] = ["descent", "anneal", "gradient", "walksat", "least-distance"];

/// A value for a required key: the doc's own example (`e.g. \`…\``) or a common choice.
fn example(family: &str, key: &Key) -> String {
    if let Some(i) = key.doc.find("e.g. `") {
        let rest = &key.doc[i + 6..];
        if let Some(j) = rest.find('`') {
            return rest[..j].to_string();
        }
    }
    match (family, key.name) {
        (_, "degree") => "3".into(),
        (_, "dimension") => "2".into(),
        (_, "k") => "3".into(),
        ("ksat", "density") => "4.0".into(),
        (_, "density") => "1.0".into(),
        _ => "1".into(),
    }
}

/// Sizes that run in seconds on a laptop, per family (the draft's starting point).
fn sizes(family: &str) -> &'static str {
    match family {
        "lattice" => "[6, 8, 12, 16]",
        "erdos-renyi" | "regular" => "[256, 512, 1024, 2048]",
        "ksat" => "[50, 100, 200]",
        "perceptron" => "[25, 50, 100]",
        // Tensor models: C(n, p) couplings per term, so smaller n.
        "cube" | "sphere" => "[32, 48, 64, 96]",
        _ => "[64, 128, 256, 512]",
    }
}

/// Comment lines for a block of keys: required keys get an example value, the others are
/// commented out with their default.
fn keys_text(family: &str, keys: &[Key]) -> String {
    let mut s = String::new();
    for k in keys {
        let ty = k.ty.replace('`', "");
        let doc = k.doc.replace('`', "");
        for line in crate::plot::figures::wrap(&format!("{doc} ({ty})"), 92) {
            s += &format!("# {line}\n");
        }
        if k.default.starts_with("required") {
            s += &format!("{} = {}\n", k.name, example(family, k));
        } else {
            s += &format!("# {} = {}\n", k.name, k.default.replace('`', ""));
        }
    }
    s
}

fn algorithm_text(kind: &crate::algo::Kind, family: &str) -> String {
    format!(
        "\n[[algorithm]]\n# {}\nkind = \"{}\"\n{}",
        crate::plot::figures::wrap(kind.summary, 92).join("\n# "),
        kind.name,
        keys_text(family, kind.keys)
    )
}

/// The draft's text for a family entry and chosen kinds (not yet validated).
fn text(f: &crate::model::FamilyEntry, name: &str, kinds: &[crate::algo::Kind]) -> String {
    let laws: Vec<&str> = f.couplings.iter().map(|c| c.name()).collect();
    let mut s = format!(
        "# A kiln experiment, drafted by `kiln draft {fam}`. Every key is listed with its type and\n\
         # meaning; commented lines show the default. `kiln check` on this file shows the plan, its\n\
         # cost and memory; `kiln run` computes it; `kiln fit` and `kiln plot` read the results.\n\
         \n[experiment]\nname = \"{name}\"\nnote = \"what this study asks\"\n\
         \n[model]\n# {summary}\nfamily = \"{fam}\"\n# coupling law: {laws}\n# couplings = \"{law0}\"\n{keys}",
        fam = f.name,
        summary = crate::plot::figures::wrap(f.summary, 92).join("\n# "),
        laws = laws.join(", "),
        law0 = laws.first().copied().unwrap_or("gaussian"),
        keys = keys_text(f.name, f.keys),
    );
    s += &format!(
        "\n[sweep]\n# {what}; every size runs every seed\nsizes = {sizes}\n\
         # instance seeds: a count (16 means seeds 0 to 15) or a range \"a..b\" (a to b − 1)\n\
         seeds = 16\n\
         # stability levels ε: the disorder is resampled with correlation 1 − ε (0 is the run itself)\n\
         epsilons = [0.0, 0.01, 0.1]\n",
        what = f.sizes,
        sizes = sizes(f.name),
    );
    for k in kinds {
        s += &algorithm_text(k, f.name);
    }
    s
}

pub fn run(a: &DraftArgs) -> anyhow::Result<ExitCode> {
    let families = crate::model::families();
    let Some(f) = families.iter().find(|f| f.name == a.family) else {
        let names: Vec<&str> = families.iter().map(|f| f.name).collect();
        return Err(InputError(format!(
            "`{}` is not a family: choose one of {} (`kiln kinds` describes them)",
            a.family,
            names.join(", ")
        ))
        .into());
    };
    let all = crate::algo::kinds();
    let find = |name: &str| all.iter().find(|k| k.name == name).copied();
    let name = a
        .name
        .clone()
        .unwrap_or_else(|| format!("{}-study", f.name));
    let chosen: Vec<crate::algo::Kind> = if a.algorithms.is_empty() {
        // The first two fallback kinds that run on this family with their defaults.
        FALLBACK_KINDS
            .iter()
            .filter_map(|n| find(n))
            .filter(|k| crate::spec::parse(&text(f, &name, &[*k]), "draft").is_ok())
            .take(2)
            .collect()
    } else {
        let mut v = Vec::new();
        for n in &a.algorithms {
            match find(n.trim()) {
                Some(k) => v.push(k),
                None => {
                    let names: Vec<&str> = all.iter().map(|k| k.name).collect();
                    return Err(InputError(format!(
                        "`{n}` is not an algorithm kind: choose among {} (`kiln kinds` describes them)",
                        names.join(", ")
                    ))
                    .into());
                }
            }
        }
        v
    };
    let body = text(f, &name, &chosen);
    // A draft is a valid spec: parse it as `kiln check` would.
    if let Err(e) = crate::spec::parse(&body, "the draft") {
        return Err(InputError(format!(
            "cannot draft this combination: {e}\n(the kinds that run on `{}` are listed by `kiln kinds`)",
            f.name
        ))
        .into());
    }
    match &a.output {
        None => out(&body),
        Some(p) => {
            if p.exists() {
                return Err(InputError(format!(
                    "{} exists: kiln draft does not overwrite a spec; choose another file",
                    p.display()
                ))
                .into());
            }
            crate::store::write_atomic(p, body.as_bytes())?;
            eprintln!(
                "wrote {}: next, `kiln check {0}` shows its plan and `kiln run {0}` runs it",
                p.display()
            );
        }
    }
    Ok(ExitCode::SUCCESS)
}
