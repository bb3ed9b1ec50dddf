//! Jobs: the TOML job file, checking it into a plan, and running the plan into an output
//! directory (inputs, golden outputs, ledger, memory map, manifest, timing). Kernels are
//! reached only through the seam in `kernels::seam`.
//!
//! ```text
//!   job.toml ─► spec ─► prepare (tables, bound kernel, partitions, memory map) ─► run ─► OutDir
//! ```

pub mod files;
pub mod limits;
pub mod outdir;
pub mod prepare;
pub mod run;
pub mod spec;

pub use outdir::{check_target, sha256_hex, OutDir};
pub use prepare::{prepare, Prepared};
pub use run::{ledger_only, run_into, RunSummary};
pub use spec::JobSpec;

use std::path::Path;

use crate::error::{Error, Result};

/// What [`run`] did.
pub struct Runs {
    /// One summary per seed (`None` without `--seeds`).
    pub runs: Vec<(Option<u64>, RunSummary)>,
    /// Temporary directories of dead earlier runs into the same target, removed.
    pub stale_removed: Vec<std::path::PathBuf>,
    /// The bound kernel's warnings (the same for every seed).
    pub warnings: Vec<String>,
}

/// Runs `spec` into `out` (or, with `seeds`, once per seed into `out/seed-N/`); the
/// directory appears only when every run succeeded. Files in `protect` (the job file)
/// must not lie inside `out`.
pub fn run(
    spec: &JobSpec,
    job_dir: &Path,
    out: &Path,
    force: bool,
    seeds: Option<std::ops::Range<u64>>,
    protect: &[&Path],
    progress: &mut dyn FnMut(usize, usize),
) -> Result<Runs> {
    let plans: Vec<(Option<u64>, Prepared)> = match seeds {
        None => vec![(None, prepare(spec, job_dir)?)],
        Some(r) => {
            if r.is_empty() {
                return Err(Error::input(format!(
                    "--seeds {}..{} is empty",
                    r.start, r.end
                )));
            }
            r.map(|seed| {
                let mut s = spec.clone();
                s.set_seed(seed);
                prepare(&s, job_dir).map(|p| (Some(seed), p))
            })
            .collect::<Result<_>>()?
        }
    };
    let warnings = plans[0].1.kernel.warnings();
    let dir = OutDir::create(out, force, protect)?;
    let stale_removed = dir.stale_removed().to_vec();
    let mut results = Vec::new();
    for (seed, prep) in &plans {
        let prefix = seed.map(|s| format!("seed-{s}/")).unwrap_or_default();
        results.push((*seed, run_into(prep, &dir, &prefix, progress)?));
    }
    dir.commit()?;
    Ok(Runs {
        runs: results,
        stale_removed,
        warnings,
    })
}
