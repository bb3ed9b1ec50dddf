//! `weir report`: writes `RUN_DIR/report.html`.

use std::path::{Path, PathBuf};

use weir::report::{gather, render};
use weir::Result;

use super::args::ReportArgs;
use super::gen::write_file_atomic;
use super::Outcome;

/// Writes `dir/report.html` (replacing weir's own earlier report) and returns its path.
pub fn write_report(dir: &Path) -> Result<PathBuf> {
    let page = render(&gather(dir)?);
    let out = dir.join("report.html");
    write_file_atomic(&out, page.as_bytes(), true)?;
    Ok(out)
}

/// `weir report`.
pub fn report(a: ReportArgs) -> Result<Outcome> {
    let out = write_report(&a.run_dir)?;
    say!("wrote {}", out.display());
    Ok(Outcome::Ok)
}
