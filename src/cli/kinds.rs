//! `kiln kinds`: the families and algorithm kinds of the registries, with their keys and defaults.
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
    let (families, kinds) = (crate::model::families(), crate::algo::kinds());
    if a.markdown {
        super::out(&crate::spec::reference(&families, &kinds));
    } else {
        super::out(&crate::spec::listing(&families, &kinds));
    }
    Ok(ExitCode::SUCCESS)
}
