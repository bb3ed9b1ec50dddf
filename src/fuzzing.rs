//! Entry points for fuzzing: one function per parser of user bytes, each taking arbitrary
//! bytes and returning `Ok` or an error, never panicking, hanging or allocating without
//! bound. The fuzz targets in `fuzz/` call them, and `tests/fuzz_replay.rs` replays every
//! saved input through the same functions, so a fixed finding stays fixed on stable Rust.
//!
//! They live in the library, not in `fuzz/`, so both callers share one definition. None
//! writes outside the system temporary directory: the job entry runs ledger-only, and the
//! check entries work in a directory of their own below it.

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use crate::check::{self, CheckOptions};
use crate::error::{Error, Result};
use crate::job::{self, JobSpec};
use crate::kernels::predicate;
use crate::manifest::Manifest;
use crate::table::{self, ElemType};

/// Rows a fuzzed job may generate in all; larger jobs are refused before preparing, so
/// one input runs in milliseconds.
pub const JOB_ROWS: u64 = 4096;
/// Engines a fuzzed job may ask for.
pub const JOB_ENGINES: u32 = 16;

/// The schema fuzzed predicates bind against: one column of every element type.
pub fn predicate_schema() -> Vec<(String, ElemType)> {
    use ElemType::*;
    [U1, U2, U4, U8, I8, U16, I16, U32, I32, U64, I64, F32, F64]
        .iter()
        .map(|t| (t.name().to_string(), *t))
        .collect()
}

/// The predicate language: parse, bind, evaluate on a few rows, extract ranges, print SQL.
pub fn predicate(data: &[u8]) -> Result<()> {
    let text = std::str::from_utf8(data).map_err(|e| Error::input(e.to_string()))?;
    let schema = predicate_schema();
    let b = predicate::compile(text, &schema).map_err(|e| Error::input(e.to_string()))?;
    let _ = b.ranges(&schema);
    let _ = b.to_sql(&schema);
    let _ = b.never_matches(&schema);
    for row in [0u8, 1, 0xff] {
        let _ = b.eval(&|c| row_value(schema[c].1, row));
    }
    Ok(())
}

fn row_value(ty: ElemType, row: u8) -> predicate::Value {
    use predicate::Value;
    match ty {
        ElemType::F32 | ElemType::F64 => Value::F(match row {
            0 => 0.0,
            1 => f64::NAN,
            _ => -1e300,
        }),
        t if t.is_signed_int() => Value::I(match row {
            0 => 0,
            1 => -1,
            _ => t.int_range().0 as i64,
        }),
        t => Value::U(match row {
            0 => 0,
            1 => 1,
            _ => t.int_range().1 as u64,
        }),
    }
}

/// A job file into a prepared plan and its ledger (nothing is written). Jobs asking for
/// more than [`JOB_ROWS`] rows or [`JOB_ENGINES`] engines are refused first.
pub fn job_plan(data: &[u8]) -> Result<()> {
    let text = std::str::from_utf8(data).map_err(|e| Error::input(e.to_string()))?;
    let spec = JobSpec::from_toml(text, Path::new("fuzz.toml"))?;
    let mut rows = 0u64;
    for (_, t) in spec.table_specs()? {
        rows = rows.saturating_add(t.rows.unwrap_or(0));
        if t.turbines.unwrap_or(0) > 64 {
            return Err(Error::input("fuzzing: too many turbines"));
        }
    }
    let l = &spec.layout;
    let part_rows: u64 = l
        .partition_rows
        .iter()
        .flatten()
        .fold(0, |a, b| a.saturating_add(*b));
    if rows > JOB_ROWS || part_rows > JOB_ROWS || l.partitions > JOB_ENGINES {
        return Err(Error::input("fuzzing: job too large"));
    }
    let dir = scratch("job");
    let prep = job::prepare(&spec, &dir)?;
    job::ledger_only(&prep)?;
    Ok(())
}

/// A hex dump: the first byte picks the word width, the rest is the text.
pub fn hex(data: &[u8]) -> Result<()> {
    const WIDTHS: [u32; 8] = [8, 16, 32, 64, 128, 256, 512, 1024];
    let Some((&pick, rest)) = data.split_first() else {
        return Ok(());
    };
    let text = std::str::from_utf8(rest).map_err(|e| Error::input(e.to_string()))?;
    let bits = WIDTHS[usize::from(pick) % WIDTHS.len()];
    crate::image::read_hex(text, bits).map_err(|e| Error::input(e.to_string()))?;
    Ok(())
}

/// A `.npy` file: the codec, then as a typed column of its own dtype and of `u32`.
pub fn npy(data: &[u8]) -> Result<()> {
    crate::npy::read_npy(data).map_err(|e| Error::input(e.to_string()))?;
    let p = Path::new("fuzz.npy");
    let own = table::npy_column_from_bytes(data, p, "c", None);
    let typed = table::npy_column_from_bytes(data, p, "c", Some(ElemType::U32));
    own.and(typed).map(|_| ())
}

/// A CSV table, with types from its header and against a fixed schema.
pub fn csv(data: &[u8]) -> Result<()> {
    let p = Path::new("fuzz.csv");
    let own = table::read_csv_from(data, p, "t", None);
    let schema = [
        ("a".to_string(), ElemType::I16),
        ("b".to_string(), ElemType::F32),
        ("c".to_string(), ElemType::U2),
    ];
    let fixed = table::read_csv_from(data, p, "t", Some(&schema));
    own.and(fixed).map(|_| ())
}

/// The job whose run directory the check entries compare against: two engines, row ids
/// and a projection of two columns, every image format.
pub const CHECK_JOB: &str = "[input]\ntable = \"t\"\nrows = 300\nseed = 7\n[[input.columns]]\nname = \"a\"\ntype = \"u16\"\ndist = \"uniform\"\nmin = 0\nmax = 99\n[[input.columns]]\nname = \"b\"\ntype = \"i32\"\ndist = \"uniform\"\nmin = -50\nmax = 50\n[layout]\nword_bits = 64\npartitions = 2\nchannels = 2\n[kernel]\nname = \"scan\"\npredicate = \"a < 40\"\noutput = \"project\"\nproject = [\"a\", \"b\"]\n[output]\nformats = [\"hex\", \"bin\", \"npy\"]\n";

/// The pristine run directory of [`CHECK_JOB`], written once per process.
pub fn check_run_dir() -> &'static Path {
    static DIR: OnceLock<PathBuf> = OnceLock::new();
    DIR.get_or_init(|| {
        let base = scratch("golden");
        let out = base.join("run");
        if !out.join("manifest.json").is_file() {
            let spec = JobSpec::from_toml(CHECK_JOB, Path::new("check.toml"))
                .expect("the check job parses");
            job::run(&spec, &base, &out, true, None, &[], &mut |_, _| {})
                .expect("the check job runs");
        }
        out
    })
}

fn golden_files(m: &Manifest) -> Vec<String> {
    m.files
        .iter()
        .filter(|f| f.role == Some(crate::manifest::Role::Golden) && f.format != "npy-typed")
        .map(|f| f.path.clone())
        .collect()
}

fn options(pick: u8) -> CheckOptions {
    CheckOptions {
        unordered: pick & 1 != 0,
        strict: pick & 2 != 0,
        tolerance: (pick & 4 != 0).then_some(crate::check::Tolerance::Ulps(u64::from(pick >> 3))),
        outputs: Vec::new(),
    }
}

/// `weir check` on a mutated dump: the first byte picks the golden output, the dump's
/// format and the options; the rest is the dump file.
pub fn check_dump(data: &[u8]) -> Result<()> {
    let Some((&pick, rest)) = data.split_first() else {
        return Ok(());
    };
    let run = check_run_dir();
    let m = Manifest::load(run)?;
    let goldens = golden_files(&m);
    let golden = &goldens[usize::from(pick >> 4) % goldens.len()];
    let stem = golden.rsplit('/').next().unwrap_or(golden);
    let stem = stem.rsplit_once('.').map_or(stem, |(s, _)| s);
    let ext = ["hex", "bin", "npy"][usize::from(pick >> 2 & 3) % 3];
    let dir = scratch("dump");
    let dump = dir.join(format!("{stem}.{ext}"));
    std::fs::write(&dump, rest).map_err(|e| Error::io(&dump, e))?;
    let r = check::check(run, &dump, &options(pick));
    let _ = std::fs::remove_file(&dump);
    r.map(|rep| {
        let _ = rep.to_text();
    })
}

/// `weir check` and the manifest checks of `weir inspect` on a mutated golden directory:
/// the first byte picks what the rest replaces (bit 7: the manifest; else bits 2–6 pick a
/// golden file, whose size and checksum the manifest is updated to match so the check
/// reads it) and the options (bits 0–1).
pub fn check_golden(data: &[u8]) -> Result<()> {
    let Some((&pick, rest)) = data.split_first() else {
        return Ok(());
    };
    let run = check_run_dir();
    let m = Manifest::load(run)?;
    let dir = scratch("mutated").join("run");
    let _ = std::fs::remove_dir_all(&dir);
    copy_tree(run, &dir)?;
    let goldens = golden_files(&m);
    if pick & 0x80 != 0 {
        let p = dir.join("manifest.json");
        std::fs::write(&p, rest).map_err(|e| Error::io(&p, e))?;
    } else {
        let path = &goldens[usize::from(pick >> 2 & 0x1f) % goldens.len()];
        let p = dir.join(path);
        std::fs::write(&p, rest).map_err(|e| Error::io(&p, e))?;
        let mut m2 = m.clone();
        for f in m2.files.iter_mut().filter(|f| &f.path == path) {
            f.bytes = rest.len() as u64;
            f.sha256 = job::sha256_hex(rest);
        }
        let mp = dir.join("manifest.json");
        std::fs::write(&mp, m2.to_json()).map_err(|e| Error::io(&mp, e))?;
    }
    if let Ok(m) = Manifest::load(&dir) {
        let _ = m.verify(&dir);
    }
    let r = check::check(&dir, &run.join("golden"), &options(pick));
    let _ = std::fs::remove_dir_all(&dir);
    r.map(|rep| {
        let _ = rep.to_text();
    })
}

fn copy_tree(from: &Path, to: &Path) -> Result<()> {
    std::fs::create_dir_all(to).map_err(|e| Error::io(to, e))?;
    for e in std::fs::read_dir(from).map_err(|e| Error::read(from, e))? {
        let e = e.map_err(|e| Error::read(from, e))?;
        let (src, dst) = (e.path(), to.join(e.file_name()));
        if src.is_dir() {
            copy_tree(&src, &dst)?;
        } else {
            std::fs::copy(&src, &dst).map_err(|e| Error::io(&dst, e))?;
        }
    }
    Ok(())
}

/// A directory of this process below the system temporary directory, created on first use.
fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir()
        .join(format!("weir-fuzz-{}", std::process::id()))
        .join(name);
    let _ = std::fs::create_dir_all(&d);
    d
}
