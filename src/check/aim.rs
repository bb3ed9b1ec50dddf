//! Aiming a check: which golden outputs, which dump file for each, and the golden files
//! verified against the manifest before anything is compared.
//!
//! GOLDEN is a run directory or its `golden/` folder. DEVICE is one dump (its output
//! named by its file stem, or by `--output`), a directory holding dumps of any subset of
//! outputs named like the golden files, or another run directory (its `golden/` is read).
//! When a directory holds one output in several formats they must agree.

use std::path::{Path, PathBuf};

use super::compare::{ordered, trailing};
use super::diagnose::{diagnose, Context};
use super::dump::{first_disagreement, read};
use super::shape::Shape;
use super::unordered::diff;
use super::{CheckOptions, CheckReport, Mismatch, OutputCheck, Verdict, FIRST_MISMATCHES};
use crate::error::{Error, Result};
use crate::image::{self, ImageFormat, WordDump, WordState};
use crate::manifest::{FileEntry, Manifest, Role};

/// One golden output: its stem and every golden file of it (hex, bin, npy words).
struct Output<'a> {
    stem: String,
    files: Vec<&'a FileEntry>,
}

impl Output<'_> {
    /// The file cheapest to read.
    fn best(&self) -> &FileEntry {
        let rank = |f: &&&FileEntry| ["bin", "npy", "hex"].iter().position(|x| *x == f.format);
        self.files
            .iter()
            .min_by_key(rank)
            .expect("an output has a file")
    }
}

fn stem_of(path: &str) -> String {
    let name = path.rsplit('/').next().unwrap_or(path);
    name.rsplit_once('.').map_or(name, |(s, _)| s).to_string()
}

fn golden_outputs(m: &Manifest) -> Vec<Output<'_>> {
    let mut out: Vec<Output> = Vec::new();
    let golden = m
        .files
        .iter()
        .filter(|f| f.role == Some(Role::Golden) && f.format != "npy-typed");
    for f in golden {
        let stem = stem_of(&f.path);
        match out.iter_mut().find(|o| o.stem == stem) {
            Some(o) => o.files.push(f),
            None => out.push(Output {
                stem,
                files: vec![f],
            }),
        }
    }
    out
}

/// A run directory, given as itself or as its `golden/` folder.
fn run_dir(p: &Path) -> PathBuf {
    let up = p
        .parent()
        .filter(|_| p.file_name().is_some_and(|n| n == "golden"));
    match up {
        Some(parent) if !p.join(crate::manifest::MANIFEST_FILE).is_file() => parent.to_path_buf(),
        _ => p.to_path_buf(),
    }
}

/// The dump files of `stem` in `dir`.
fn dumps_in(dir: &Path, stem: &str) -> Vec<PathBuf> {
    ["hex", "bin", "npy"]
        .iter()
        .map(|e| dir.join(format!("{stem}.{e}")))
        .filter(|p| p.is_file())
        .collect()
}

/// Verifies every golden file of `o` against the manifest.
fn verify(dir: &Path, o: &Output<'_>) -> Result<()> {
    for f in &o.files {
        let p = dir.join(&f.path);
        let bytes = std::fs::read(&p).map_err(|e| Error::read(&p, e))?;
        let h = crate::job::sha256_hex(&bytes);
        if h != f.sha256 {
            return Err(Error::input(format!(
                "{}: golden file changed since the run (sha256 {h}, manifest says {}); restore it or re-run the job",
                p.display(),
                f.sha256
            )));
        }
    }
    Ok(())
}

/// Reads the one dump of an output from `files`, requiring several formats to agree.
fn read_agreeing(files: &[PathBuf], shape: &Shape) -> Result<WordDump> {
    let first = read(&files[0], shape)?;
    for other in &files[1..] {
        let d = read(other, shape)?;
        if let Some(w) = first_disagreement(&first, &d) {
            return Err(Error::input(format!(
                "{} and {} disagree from word {w} on; remove one, or name the one to check",
                files[0].display(),
                other.display()
            )));
        }
    }
    Ok(first)
}

/// Checks the device dumps at `device` against the run at `golden`.
pub fn check(golden: &Path, device: &Path, opts: &CheckOptions) -> Result<CheckReport> {
    let gdir = run_dir(golden);
    let m = Manifest::load(&gdir)?;
    let outputs = golden_outputs(&m);
    if outputs.is_empty() {
        return Err(Error::input(format!(
            "{}: the manifest lists no golden outputs",
            gdir.display()
        )));
    }
    let names = || {
        outputs
            .iter()
            .map(|o| o.stem.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    };
    for n in &opts.outputs {
        if !outputs.iter().any(|o| o.stem == *n) {
            return Err(Error::input(format!(
                "--output {n}: no golden output is named so (golden outputs: {})",
                names()
            )));
        }
    }
    let wanted = |o: &Output| opts.outputs.is_empty() || opts.outputs.contains(&o.stem);
    let mut plan: Vec<(&Output, Vec<PathBuf>)> = Vec::new();
    if device.is_dir() {
        let ddir = if device.join(crate::manifest::MANIFEST_FILE).is_file() {
            device.join("golden")
        } else {
            device.to_path_buf()
        };
        for o in outputs.iter().filter(|o| wanted(o)) {
            plan.push((o, dumps_in(&ddir, &o.stem)));
        }
        if plan.iter().all(|p| p.1.is_empty()) {
            return Err(Error::input(format!(
                "{}: no device dump is named like a golden output (looked for {}.hex, .bin and .npy, …); name a single dump with --output",
                ddir.display(),
                plan.first().map_or(outputs[0].stem.as_str(), |p| p.0.stem.as_str())
            )));
        }
    } else if device.is_file() {
        let stem = match opts.outputs.as_slice() {
            [] => stem_of(&device.to_string_lossy()),
            [one] => one.clone(),
            _ => {
                return Err(Error::input(format!(
                    "{}: one dump holds one output; give --output once",
                    device.display()
                )))
            }
        };
        let o = outputs.iter().find(|o| o.stem == stem).ok_or_else(|| {
            Error::input(format!(
                "{}: no golden output is named {stem}; say which one the dump holds with --output (golden outputs: {})",
                device.display(),
                names()
            ))
        })?;
        plan.push((o, vec![device.to_path_buf()]));
    } else {
        return Err(Error::input(format!(
            "{}: no such file or directory",
            device.display()
        )));
    }
    for (o, files) in &plan {
        if !files.is_empty() {
            verify(&gdir, o)?;
        }
    }
    let mut checks = Vec::new();
    for (o, files) in &plan {
        checks.push(check_one(&gdir, &m, &outputs, o, files, opts)?);
    }
    let checked = || checks.iter().filter(|c| c.verdict != Verdict::NotChecked);
    Ok(CheckReport {
        matched: checked().count() > 0 && checked().all(|c| c.verdict == Verdict::Match),
        unordered: opts.unordered,
        strict: opts.strict,
        tolerance: opts.tolerance,
        outputs: checks,
    })
}

fn load_golden(gdir: &Path, g: &FileEntry, word_bits: u32) -> Result<Vec<u8>> {
    let p = gdir.join(&g.path);
    let format = ImageFormat::from_path(&p)
        .ok_or_else(|| Error::input(format!("{}: unknown image format", p.display())))?;
    let bytes = std::fs::read(&p).map_err(|e| Error::read(&p, e))?;
    let d = image::read_image(format, &bytes, g.word_bits.unwrap_or(word_bits))
        .map_err(|e| Error::input(format!("{}: {e}", p.display())))?;
    Ok(d.data)
}

fn check_one(
    gdir: &Path,
    m: &Manifest,
    all: &[Output<'_>],
    o: &Output<'_>,
    files: &[PathBuf],
    opts: &CheckOptions,
) -> Result<OutputCheck> {
    let g = o.best();
    let mut shape = Shape::of(g, m.word_bits).map_err(|e| {
        Error::input(format!(
            "{}: {}: {e}",
            gdir.join(crate::manifest::MANIFEST_FILE).display(),
            g.path
        ))
    })?;
    let mut out = OutputCheck {
        output: o.stem.clone(),
        engine: g.partition,
        channel: g.channel,
        golden_file: g.path.clone(),
        device_file: None,
        records: shape.records,
        differing: 0,
        surplus: None,
        verdict: Verdict::NotChecked,
        first_mismatches: Vec::new(),
        first_surplus: Vec::new(),
        diagnosis: None,
        notes: Vec::new(),
        ignored_words: 0,
    };
    if files.is_empty() {
        return Ok(out);
    }
    let gold = load_golden(gdir, g, m.word_bits)?;
    if (gold.len() as u64) < shape.payload() {
        return Err(Error::input(format!(
            "{}: holds {} bytes of records, the manifest's {} records need {}; re-run the job",
            gdir.join(&g.path).display(),
            gold.len(),
            shape.records,
            shape.payload()
        )));
    }
    shape.words = (gold.len() as u64 / shape.word_bytes).max(shape.words);
    let dump = read_agreeing(files, &shape)?;
    out.device_file = Some(files[0].display().to_string());
    let unordered = opts.unordered && shape.rec > 0;
    if unordered {
        unordered_into(&mut out, &shape, &gold, &dump);
    } else {
        let r = ordered(&shape, &gold, &dump, opts.tolerance);
        out.differing = r.differing;
        out.first_mismatches = r.first;
    }
    out.ignored_words = (dump.words() as u64).saturating_sub(shape.words);
    let junk = trailing(&shape, &dump);
    if out.differing > 0 || out.surplus.unwrap_or(0) > 0 {
        let neighbours = || neighbours(gdir, m, all, o, g);
        let mut row_starts: Vec<(u32, u64)> = all
            .iter()
            .filter_map(|x| Some((x.best().partition?, x.best().rows?[0])))
            .collect();
        row_starts.sort_by_key(|&(e, _)| (Some(e) != g.partition, e));
        row_starts.dedup();
        let ctx = Context {
            gold: &gold,
            dump: &dump,
            row_starts,
            neighbours: &neighbours,
            shape_only: unordered,
        };
        out.diagnosis = diagnose(&shape, &ctx);
    }
    let strict_fail = opts.strict && junk.is_some();
    out.notes.extend(junk);
    if out.ignored_words > 0 {
        out.notes.push(format!(
            "{} words past the golden output ignored",
            out.ignored_words
        ));
    }
    out.verdict = if out.differing == 0 && out.surplus.unwrap_or(0) == 0 && !strict_fail {
        Verdict::Match
    } else {
        Verdict::Mismatch
    };
    Ok(out)
}

/// Golden bytes of the other outputs of the same name (`out` of other engines).
fn neighbours(
    gdir: &Path,
    m: &Manifest,
    all: &[Output<'_>],
    o: &Output<'_>,
    g: &FileEntry,
) -> Vec<(String, Vec<u8>)> {
    all.iter()
        .filter(|x| x.stem != o.stem && x.best().column == g.column)
        .filter_map(|x| {
            Some((
                x.stem.clone(),
                load_golden(gdir, x.best(), m.word_bits).ok()?,
            ))
        })
        .collect()
}

fn unordered_into(out: &mut OutputCheck, s: &Shape, gold: &[u8], dump: &WordDump) {
    let rec = s.rec as usize;
    let payload = s.payload() as usize;
    let wb = s.word_bytes as usize;
    let mut dev = dump.data.clone();
    dev.resize(payload.max(dev.len()), 0);
    let ok = |i: usize| {
        let (w0, w1) = (i * rec / wb, ((i + 1) * rec - 1) / wb);
        w1 < dump.words() && dump.state[w0..=w1].iter().all(|x| *x == WordState::Written)
    };
    let d = diff(&gold[..payload], &dev[..payload], rec, &ok);
    out.differing = d.missing.len() as u64;
    out.surplus = Some(d.surplus.len() as u64);
    let m = |r: u64, from: &[u8], gold_side: bool| {
        let off = r * s.rec;
        let v = s.render(&from[off as usize..(off + s.rec) as usize]);
        let (expected, found) = if gold_side {
            (v, String::new())
        } else {
            (String::new(), v)
        };
        super::compare::mismatch(s, r, off, expected, found)
    };
    out.first_mismatches = d
        .missing
        .iter()
        .take(FIRST_MISMATCHES)
        .map(|&r| m(r, gold, true))
        .collect();
    out.first_surplus = d
        .surplus
        .iter()
        .take(FIRST_MISMATCHES)
        .map(|&r| m(r, &dev, false))
        .collect::<Vec<Mismatch>>();
}
