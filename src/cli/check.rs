//! `weir inspect` and `weir check`.

use weir::check::{self, CheckOptions, Tolerance};
use weir::manifest::Manifest;
use weir::tables::{human_bytes, TextTable};
use weir::{Error, Result};

use super::args::{CheckArgs, InspectArgs};
use super::Outcome;

/// `weir inspect`: the manifest as a table, then every checksum verified.
pub fn inspect(a: InspectArgs) -> Result<Outcome> {
    let m = Manifest::load(&a.dir)?;
    say!(
        "{}: manifest format {}, written by weir {}, {}-bit words",
        a.dir.display(),
        m.format_version,
        m.tool_version,
        m.word_bits
    );
    let mut t = TextTable::new(&[
        "path", "role", "part", "ch", "base", "rows", "elem", "words", "size", "sha256",
    ]);
    let opt = |v: Option<u64>| v.map(|x| x.to_string()).unwrap_or_default();
    for f in &m.files {
        t.row(vec![
            f.path.clone(),
            f.role.map(|r| r.name().to_string()).unwrap_or_default(),
            opt(f.partition.map(u64::from)),
            opt(f.channel.map(u64::from)),
            f.base.map(|b| format!("0x{b:x}")).unwrap_or_default(),
            f.rows
                .map(|r| format!("{}..{}", r[0], r[1]))
                .unwrap_or_default(),
            f.elem.clone().unwrap_or_default(),
            opt(f.words),
            human_bytes(f.bytes),
            f.sha256[..12.min(f.sha256.len())].to_string(),
        ]);
    }
    say!("{}", t.render().trim_end());
    let bad = m.verify(&a.dir);
    if bad.is_empty() {
        say!("all {} checksums match", m.files.len());
        Ok(Outcome::Ok)
    } else {
        for (p, why) in &bad {
            say!("CHANGED {p}: {why}");
        }
        say!(
            "{} of {} files differ from the manifest",
            bad.len(),
            m.files.len()
        );
        Ok(Outcome::Mismatch)
    }
}

/// The float tolerance the flags ask for.
fn tolerance(a: &CheckArgs) -> Result<Option<Tolerance>> {
    if let Some(n) = a.ulps {
        return Ok(Some(Tolerance::Ulps(n)));
    }
    if a.abs.is_none() && a.rel.is_none() {
        return Ok(None);
    }
    let (abs, rel) = (a.abs.unwrap_or(0.0), a.rel.unwrap_or(0.0));
    for (flag, v) in [("--abs", abs), ("--rel", rel)] {
        if !(v.is_finite() && v >= 0.0) {
            return Err(Error::input(format!(
                "{flag} {v}: must be a finite number of at least 0"
            )));
        }
    }
    Ok(Some(Tolerance::Near { abs, rel }))
}

/// `weir check`.
pub fn check(a: CheckArgs) -> Result<Outcome> {
    let tolerance = tolerance(&a)?;
    let report = check::check(
        &a.golden,
        &a.device,
        &CheckOptions {
            unordered: a.unordered,
            strict: a.strict,
            tolerance,
            outputs: a.outputs,
        },
    )?;
    if a.json {
        say!(
            "{}",
            serde_json::to_string_pretty(&report).expect("report serializes")
        );
    } else {
        say!("{}", report.to_text().trim_end());
    }
    Ok(if report.matched {
        Outcome::Ok
    } else {
        Outcome::Mismatch
    })
}
