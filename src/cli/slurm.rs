//! `kiln slurm`: writes the batch scripts that run a spec as a Slurm job array over a shared
//! cache, plus a dependent job that assembles the table, and prints how to submit them.
//!
//! Slurm distributes; kiln only splits deterministically into parts (`kiln run --part i/N`,
//! counted from 1, the array's task ids 1..N), so a task that is cancelled and resubmitted
//! recomputes only what its part is missing.

use super::{InputError, SpecArgs, out};
use crate::exec::memory;
use crate::spec::plan::expand;
use crate::spec::shard;
use clap::Args;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct SlurmArgs {
    #[command(flatten)]
    pub common: SpecArgs,
    /// Number of parts, one array task each (task ids 1..N run `kiln run --part i/N`).
    #[arg(long, value_name = "N")]
    pub parts: u32,
    /// Partition to submit to (default: the cluster's default).
    #[arg(long, value_name = "P")]
    pub partition: Option<String>,
    /// Time limit per task, e.g. 02:00:00 (default: an estimate from the plan's cost).
    #[arg(long, value_name = "T")]
    pub time: Option<String>,
    /// Memory per task, e.g. 8G (default: the plan's largest cell × cpus, plus a margin).
    #[arg(long, value_name = "M")]
    pub mem: Option<String>,
    /// CPUs per task (cells run side by side inside a task).
    #[arg(long, value_name = "C", default_value_t = 1)]
    pub cpus: u32,
    /// Folder for the scripts (default: <results>/<experiment>/slurm).
    #[arg(long, value_name = "DIR")]
    pub dir: Option<PathBuf>,
}

/// Conservative throughput for the time estimate: cost units (≈ elementary updates) per second
/// per CPU. Measured rates here are 5–10× higher; the margin covers slower nodes.
pub(crate) const COST_PER_SECOND: f64 = 2e8;

fn quote(p: &Path) -> String {
    format!("'{}'", p.display().to_string().replace('\'', "'\\''"))
}

fn absolute(p: &Path) -> PathBuf {
    if p.is_absolute() {
        p.to_path_buf()
    } else {
        std::env::current_dir()
            .map(|d| d.join(p))
            .unwrap_or_else(|_| p.to_path_buf())
    }
}

pub fn run(a: &SlurmArgs) -> anyhow::Result<ExitCode> {
    let c = &a.common;
    if a.parts == 0 || a.cpus == 0 {
        return Err(InputError("--parts and --cpus must be at least 1".into()).into());
    }
    let spec = c.load_spec()?;
    let plan = expand(&spec);
    let (largest, _) = memory::largest_cell(&spec);
    let mem_mb = match &a.mem {
        Some(m) => {
            memory::parse_size(m).map_err(|e| InputError(format!("--mem: {e}")))? / (1 << 20)
        }
        None => ((largest * a.cpus as u128) / (1 << 20)) as u64 + 512,
    };
    // Time: the most loaded part's cost at the conservative rate, ×2, at least 10 minutes.
    let worst = shard::assign(&spec, &plan, a.parts)
        .load
        .into_iter()
        .fold(0.0, f64::max);
    let time = match &a.time {
        Some(t) => t.clone(),
        None => {
            let minutes = ((2.0 * worst / COST_PER_SECOND / a.cpus as f64) / 60.0)
                .ceil()
                .max(10.0) as u64;
            format!("{:02}:{:02}:00", minutes / 60, minutes % 60)
        }
    };

    let results = absolute(&c.folders.results);
    let cache = absolute(&c.folders.cache_dir());
    let dir = absolute(
        &a.dir
            .clone()
            .unwrap_or_else(|| results.join(&spec.name).join("slurm")),
    );
    std::fs::create_dir_all(&dir)
        .map_err(|e| InputError(format!("cannot create {}: {e}", dir.display())))?;
    // The job runs a frozen copy of the spec, so edits while it waits in the queue do not mix.
    let spec_copy = dir.join("spec.toml");
    crate::store::write_atomic(&spec_copy, spec.text.as_bytes())?;
    let kiln = std::env::current_exe()?;
    let part = a
        .partition
        .as_ref()
        .map_or(String::new(), |p| format!("#SBATCH --partition={p}\n"));
    let common_args = format!("--results {} --cache {}", quote(&results), quote(&cache));
    let array = format!(
        "#!/bin/bash\n\
         # kiln: {name}, {tasks} parts of {cells} cells over the cache {cache_s}\n\
         #SBATCH --job-name=kiln-{name}\n\
         #SBATCH --array=1-{tasks}\n\
         #SBATCH --cpus-per-task={cpus}\n\
         #SBATCH --mem={mem_mb}M\n\
         #SBATCH --time={time}\n\
         {part}\
         #SBATCH --output={out}/part-%a.out\n\
         # SIGTERM a minute before the time limit: kiln finishes its cells in flight or stops them at a sweep\n\
         # (--grace), releases its claims and exits 143; the next submission resumes.\n\
         #SBATCH --signal=B:TERM@60\n\
         set -euo pipefail\n\
         exec {kiln} run {spec} --part \"$SLURM_ARRAY_TASK_ID/{tasks}\" {common_args} --jobs \"${{SLURM_CPUS_PER_TASK:-{cpus}}}\" --quiet\n",
        name = spec.name,
        tasks = a.parts,
        cells = plan.cells.len(),
        cache_s = cache.display(),
        cpus = a.cpus,
        out = dir.display(),
        kiln = quote(&kiln),
        spec = quote(&spec_copy),
    );
    let assemble = format!(
        "#!/bin/bash\n\
         # kiln: assemble the table of {name} once every part is done (computes anything missing)\n\
         #SBATCH --job-name=kiln-{name}-table\n\
         #SBATCH --cpus-per-task=1\n\
         #SBATCH --mem={mem_mb}M\n\
         #SBATCH --time={time}\n\
         {part}\
         #SBATCH --output={out}/assemble.out\n\
         #SBATCH --signal=B:TERM@60\n\
         set -euo pipefail\n\
         exec {kiln} run {spec} {common_args} --jobs 1 --quiet\n",
        name = spec.name,
        out = dir.display(),
        kiln = quote(&kiln),
        spec = quote(&spec_copy),
    );
    let submit = format!(
        "#!/bin/bash\n\
         # Submits the array of parts, then the table job to run after every part succeeded.\n\
         set -euo pipefail\n\
         cd {dir}\n\
         array=$(sbatch --parsable \"$@\" array.sbatch)\n\
         array=${{array%%;*}}\n\
         table=$(sbatch --parsable --dependency=afterok:$array \"$@\" assemble.sbatch)\n\
         echo \"submitted parts $array and table job ${{table%%;*}}\"\n",
        dir = quote(&dir)
    );
    let write = |name: &str, text: &str| -> anyhow::Result<PathBuf> {
        let p = dir.join(name);
        crate::store::write_atomic(&p, text.as_bytes())?;
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(&p, std::fs::Permissions::from_mode(0o755))?;
        Ok(p)
    };
    let array_p = write("array.sbatch", &array)?;
    let assemble_p = write("assemble.sbatch", &assemble)?;
    let submit_p = write("submit.sh", &submit)?;
    if c.json {
        let v = serde_json::json!({
            "experiment": spec.name,
            "parts": a.parts,
            "mem_mb": mem_mb,
            "time": time,
            "array": array_p.display().to_string(),
            "assemble": assemble_p.display().to_string(),
            "submit": submit_p.display().to_string(),
            "cache": cache.display().to_string(),
        });
        out(&format!("{v}\n"));
    } else {
        out(&format!(
            "wrote {}\n      {}\n      {}\n{} parts (array tasks) × {} CPU, {mem_mb} MiB and {time} each; cache {}\nsubmit with:\n  bash {}\n",
            array_p.display(),
            assemble_p.display(),
            submit_p.display(),
            a.parts,
            a.cpus,
            cache.display(),
            quote(&submit_p)
        ));
    }
    Ok(ExitCode::SUCCESS)
}
