//! The spec reference, generated from the registries: the README's reference section
//! (Markdown) and `kiln kinds` (terminal). Nothing here is written by hand per kind or family,
//! so the documentation cannot drift from what the parser accepts.

use crate::algo::{Key, Kind};
use crate::model::FamilyEntry;

/// The reference as Markdown: families, then algorithm kinds.
pub fn reference(families: &[FamilyEntry], kinds: &[Kind]) -> String {
    format!(
        "### Families (`[model]`)\n\n{}### Algorithm kinds (`[[algorithm]]`)\n\n{}",
        crate::model::reference(families),
        crate::algo::reference(kinds)
    )
}

/// A kind's or family's keys as a Markdown table (or `none` when it has no keys), followed
/// by a blank line.
pub fn key_table(keys: &[Key], none: &str) -> String {
    if keys.is_empty() {
        return format!("{none}\n\n");
    }
    let mut out = String::from("| key | type | default | meaning |\n| --- | --- | --- | --- |\n");
    for key in keys {
        out.push_str(&format!(
            "| `{}` | {} | {} | {} |\n",
            key.name, key.ty, key.default, key.doc
        ));
    }
    out.push('\n');
    out
}

/// The reference for the terminal: one block per family and per kind, its keys aligned.
pub fn listing(families: &[FamilyEntry], kinds: &[Kind]) -> String {
    let mut out = String::from("families  ([model] family = \"…\")\n\n");
    for f in families {
        let laws: Vec<&str> = f.couplings.iter().map(|c| c.name()).collect();
        block(
            &mut out,
            f.name,
            &format!(
                "{} Couplings: {}. Sizes: {}.",
                f.summary,
                laws.join(", "),
                f.sizes
            ),
            f.keys,
        );
    }
    out.push_str("algorithm kinds  ([[algorithm]] kind = \"…\")\n\n");
    for k in kinds {
        block(&mut out, k.name, k.summary, k.keys);
    }
    out
}

fn block(out: &mut String, name: &str, summary: &str, keys: &[Key]) {
    out.push_str(&format!("  {name}\n"));
    for line in crate::plot::figures::wrap(summary, 88) {
        out.push_str(&format!("      {line}\n"));
    }
    let width = keys.iter().map(|k| k.name.len()).max().unwrap_or(0);
    for key in keys {
        let head = format!(
            "      {:width$}  {}",
            key.name,
            key.default.replace('`', "")
        );
        out.push_str(&format!(
            "{head}\n      {:width$}  {}; {}\n",
            "",
            key.ty.replace('`', ""),
            key.doc.replace('`', "")
        ));
    }
    out.push('\n');
}
