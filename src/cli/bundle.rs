//! `kiln bundle FOLDER`: one reproducible archive of a results folder for a data deposit
//! ([`crate::store::bundle`]), checked afterwards with `kiln replay ARCHIVE`.

use super::{InputError, out};
use crate::store::bundle;
use clap::Args;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct BundleArgs {
    /// A results folder written by `kiln run` (results/<experiment>).
    pub folder: PathBuf,
    /// Where to write the archive. Default: `<experiment>.tar` beside the folder.
    #[arg(long, short = 'o', value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Print a machine-readable JSON summary on stdout instead of text.
    #[arg(long)]
    pub json: bool,
}

pub fn run(a: &BundleArgs) -> anyhow::Result<ExitCode> {
    if !a.folder.join("manifest.toml").is_file() {
        return Err(InputError(format!(
            "{}: no manifest.toml; give a results folder written by `kiln run` (results/<experiment>)",
            a.folder.display()
        ))
        .into());
    }
    let facts = bundle::manifest_facts(&a.folder)?;
    let dest = a.out.clone().unwrap_or_else(|| {
        a.folder
            .parent()
            .unwrap_or(std::path::Path::new("."))
            .join(format!("{}.tar", facts.experiment))
    });
    if dest.starts_with(&a.folder) {
        return Err(InputError(format!(
            "--out {}: write the archive outside the folder it holds",
            dest.display()
        ))
        .into());
    }
    let files = bundle::write(&a.folder, &dest)?;
    let bytes = std::fs::metadata(&dest).map_or(0, |m| m.len());
    let sha = {
        use sha2::{Digest, Sha256};
        hex::encode(Sha256::digest(std::fs::read(&dest)?))
    };
    if a.json {
        let v = serde_json::json!({
            "folder": a.folder.display().to_string(),
            "archive": dest.display().to_string(),
            "bytes": bytes,
            "sha256": sha,
            "files": files,
        });
        out(&format!("{v}\n"));
    } else {
        out(&format!(
            "{}: {} files, {} bytes\nsha256 {sha}\ncheck it with: kiln replay {} --checksums-only   (then without the flag to recompute cells)\n",
            dest.display(),
            files.len(),
            bytes,
            dest.display()
        ));
    }
    Ok(ExitCode::SUCCESS)
}
