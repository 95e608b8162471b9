//! `kiln kinds`: the algorithm kinds of the registry, with their settings and defaults.
//! Printed from the same list the spec parser reads, so it cannot drift from what is accepted.

use clap::Args;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct KindsArgs {
    /// Print the spec reference as Markdown (the text of the README's reference section).
    #[arg(long)]
    pub markdown: bool,
}

pub fn run(a: &KindsArgs) -> anyhow::Result<ExitCode> {
    let kinds = crate::algo::kinds();
    if a.markdown {
        super::out(&crate::algo::reference(&kinds));
    } else {
        super::out(&crate::algo::listing(&kinds));
    }
    Ok(ExitCode::SUCCESS)
}
