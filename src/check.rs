//! Comparing device dumps with golden outputs.
//!
//! Each golden output named in the manifest (role `golden`) is compared with the device's
//! dump of the same stem (`scan.p0.out.hex`, `.bin` or `.npy`), record by record up to the
//! golden record count. Past the count, whole words are ignored (and reported as ignored);
//! bytes after the last record inside its word are ignored too. Missing words, and `x`/`z`
//! or never-written words under a record, are mismatches. Integers and bitmaps compare
//! exactly; `unordered` compares record outputs as multisets.

use std::path::{Path, PathBuf};

use serde::Serialize;

use crate::error::{Error, Result};
use crate::image::{self, ImageFormat, WordDump, WordState};
use crate::manifest::{FileEntry, Manifest, Role};

/// How many mismatches a report lists per output.
pub const FIRST_MISMATCHES: usize = 10;

/// One differing record.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Mismatch {
    /// Record index (row id position, bitmap row, projected record).
    pub record: u64,
    /// Memory word index within the output region.
    pub word: u64,
    /// Byte offset of the record within the output region.
    pub byte_offset: u64,
    /// Expected value.
    pub expected: String,
    /// Value found (`x` for unknown or unwritten words, `missing` past the dump's end).
    pub found: String,
}

/// The comparison of one golden output.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct OutputCheck {
    /// Golden stem (`scan.p0.out`).
    pub output: String,
    /// Partition.
    pub partition: Option<u32>,
    /// The device file compared; `None` when the directory held no dump of this output
    /// (listed as not checked, never as matching).
    pub device_file: Option<String>,
    /// Records expected.
    pub records: u64,
    /// Records that differ.
    pub mismatches: u64,
    /// The first few mismatches.
    pub first_mismatches: Vec<Mismatch>,
    /// Words in the dump after the golden words, not compared.
    pub ignored_words: u64,
}

/// The whole report.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct CheckReport {
    /// True when at least one output was checked and every checked output matches.
    pub matched: bool,
    /// Whether records were compared as multisets.
    pub unordered: bool,
    /// One entry per golden output compared.
    pub outputs: Vec<OutputCheck>,
}

/// Options of a check.
#[derive(Debug, Clone, Copy, Default)]
pub struct CheckOptions {
    /// Compare record outputs as multisets.
    pub unordered: bool,
}

/// The golden entry of each stem, preferring the format that is cheapest to read.
fn golden_outputs(m: &Manifest) -> Vec<(String, &FileEntry)> {
    let mut out: Vec<(String, &FileEntry)> = Vec::new();
    let rank = |f: &str| match f {
        "bin" => 0,
        "npy" => 1,
        _ => 2,
    };
    for f in m
        .files
        .iter()
        .filter(|f| f.role == Some(Role::Golden) && f.format != "npy-typed")
    {
        let name = f.path.rsplit('/').next().unwrap_or(&f.path);
        let stem = name.rsplit_once('.').map_or(name, |(s, _)| s).to_string();
        match out.iter_mut().find(|(s, _)| *s == stem) {
            Some(slot) if rank(&f.format) < rank(&slot.1.format) => slot.1 = f,
            Some(_) => {}
            None => out.push((stem, f)),
        }
    }
    out
}

fn find_dump(dir: &Path, stem: &str) -> Option<PathBuf> {
    ["hex", "bin", "npy"]
        .iter()
        .map(|e| dir.join(format!("{stem}.{e}")))
        .find(|p| p.is_file())
}

fn file_stem(p: &Path) -> String {
    let name = p
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    name.rsplit_once('.')
        .map_or(name.clone(), |(s, _)| s.to_string())
}

/// Checks the device dumps at `device` (a directory, or one dump file) against `golden_dir`.
pub fn check(golden_dir: &Path, device: &Path, opts: CheckOptions) -> Result<CheckReport> {
    let m = Manifest::load(golden_dir)?;
    let golden = golden_outputs(&m);
    if golden.is_empty() {
        return Err(Error::input(format!(
            "{}: the manifest lists no golden outputs",
            golden_dir.display()
        )));
    }
    let pairs: Vec<(String, &FileEntry, Option<PathBuf>)> = if device.is_dir() {
        let pairs: Vec<_> = golden
            .iter()
            .map(|(stem, g)| (stem.clone(), *g, find_dump(device, stem)))
            .collect();
        if pairs.iter().all(|p| p.2.is_none()) {
            return Err(Error::input(format!(
                "{}: no device dump is named like a golden output (looked for {}.hex, .bin and .npy, …)",
                device.display(),
                golden[0].0
            )));
        }
        pairs
    } else if device.is_file() {
        let stem = file_stem(device);
        let g = golden.iter().find(|(s, _)| *s == stem).ok_or_else(|| {
            Error::input(format!(
                "{}: no golden output is named {stem} (golden outputs: {})",
                device.display(),
                golden
                    .iter()
                    .map(|(s, _)| s.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ))
        })?;
        vec![(stem, g.1, Some(device.to_path_buf()))]
    } else {
        return Err(Error::input(format!(
            "{}: no such file or directory",
            device.display()
        )));
    };
    let mut outputs = Vec::new();
    for (stem, g, dump_path) in pairs {
        let Some(dump_path) = dump_path else {
            outputs.push(OutputCheck {
                output: stem,
                partition: g.partition,
                device_file: None,
                records: g.records.unwrap_or(0),
                mismatches: 0,
                first_mismatches: Vec::new(),
                ignored_words: 0,
            });
            continue;
        };
        let word_bits = g.word_bits.unwrap_or(m.word_bits);
        let gpath = golden_dir.join(&g.path);
        let format = ImageFormat::from_path(&gpath)
            .ok_or_else(|| Error::input(format!("{}: unknown image format", gpath.display())))?;
        let gbytes = std::fs::read(&gpath).map_err(|e| Error::read(&gpath, e))?;
        let gold = image::read_image(format, &gbytes, word_bits)
            .map_err(|e| Error::input(format!("{}: {e}", gpath.display())))?;
        let dump =
            image::read_dump(&dump_path, word_bits).map_err(|e| Error::input(e.to_string()))?;
        outputs.push(compare(&stem, g, &gold, &dump, &dump_path, opts));
    }
    Ok(CheckReport {
        matched: outputs.iter().any(|o| o.device_file.is_some())
            && outputs.iter().all(|o| o.mismatches == 0),
        unordered: opts.unordered,
        outputs,
    })
}

/// The bytes of `dump` at byte offset `off`, or why they cannot be read.
fn dump_bytes(dump: &WordDump, off: u64, len: u64) -> std::result::Result<Vec<u8>, &'static str> {
    let wb = dump.word_bytes as u64;
    let mut out = Vec::with_capacity(len as usize);
    for b in off..off + len {
        let w = (b / wb) as usize;
        if w >= dump.words() {
            return Err("missing");
        }
        if dump.state[w] != WordState::Written {
            return Err("x");
        }
        out.push(dump.word(w)[(b % wb) as usize]);
    }
    Ok(out)
}

fn render(bytes: &[u8], elem: &str) -> String {
    match (elem, bytes.len()) {
        ("u32", 4) => u32::from_le_bytes(bytes.try_into().expect("4 bytes")).to_string(),
        ("u64", 8) => u64::from_le_bytes(bytes.try_into().expect("8 bytes")).to_string(),
        _ => {
            let mut s = String::from("0x");
            for b in bytes.iter().rev() {
                s.push_str(&format!("{b:02x}"));
            }
            s
        }
    }
}

fn compare(
    stem: &str,
    g: &FileEntry,
    gold: &WordDump,
    dump: &WordDump,
    path: &Path,
    opts: CheckOptions,
) -> OutputCheck {
    let wb = gold.word_bytes as u64;
    let records = g.records.unwrap_or(0);
    let rec = g.record_bytes.unwrap_or(0);
    let elem = g.elem.clone().unwrap_or_default();
    let gold_words = g.words.unwrap_or(gold.words() as u64);
    let mut first = Vec::new();
    let mut mismatches = 0u64;
    let note = |m: Mismatch, first: &mut Vec<Mismatch>| {
        if first.len() < FIRST_MISMATCHES {
            first.push(m);
        }
    };
    if rec == 0 {
        // Bitmap: one bit per row.
        for r in 0..records {
            let byte = r / 8;
            let want = (gold.data[byte as usize] >> (r % 8)) & 1;
            let got = dump_bytes(dump, byte, 1).map(|b| (b[0] >> (r % 8)) & 1);
            if got != Ok(want) {
                mismatches += 1;
                let found = got.map(|b| b.to_string()).unwrap_or_else(|e| e.to_string());
                note(
                    Mismatch {
                        record: r,
                        word: byte / wb,
                        byte_offset: byte,
                        expected: want.to_string(),
                        found,
                    },
                    &mut first,
                );
            }
        }
    } else if opts.unordered {
        let want: Vec<Vec<u8>> = (0..records)
            .map(|r| gold.data[(r * rec) as usize..((r + 1) * rec) as usize].to_vec())
            .collect();
        let got: Vec<std::result::Result<Vec<u8>, &str>> = (0..records)
            .map(|r| dump_bytes(dump, r * rec, rec))
            .collect();
        let mut w_sorted = want.clone();
        w_sorted.sort();
        let mut g_sorted: Vec<Vec<u8>> = got.iter().filter_map(|x| x.clone().ok()).collect();
        g_sorted.sort();
        // Records expected but not found, by multiset difference.
        let (mut i, mut j) = (0, 0);
        let mut missing = Vec::new();
        while i < w_sorted.len() {
            if j < g_sorted.len() && g_sorted[j] == w_sorted[i] {
                i += 1;
                j += 1;
            } else if j < g_sorted.len() && g_sorted[j] < w_sorted[i] {
                j += 1;
            } else {
                missing.push(w_sorted[i].clone());
                i += 1;
            }
        }
        mismatches = missing.len() as u64;
        for v in missing {
            let r = want.iter().position(|x| *x == v).unwrap_or(0) as u64;
            note(
                Mismatch {
                    record: r,
                    word: r * rec / wb,
                    byte_offset: r * rec,
                    expected: render(&v, &elem),
                    found: "not among the device's records".into(),
                },
                &mut first,
            );
        }
    } else {
        for r in 0..records {
            let off = r * rec;
            let want = &gold.data[off as usize..(off + rec) as usize];
            let got = dump_bytes(dump, off, rec);
            if got.as_deref() != Ok(want) {
                mismatches += 1;
                let found = got
                    .map(|b| render(&b, &elem))
                    .unwrap_or_else(|e| e.to_string());
                note(
                    Mismatch {
                        record: r,
                        word: off / wb,
                        byte_offset: off,
                        expected: render(want, &elem),
                        found,
                    },
                    &mut first,
                );
            }
        }
    }
    OutputCheck {
        output: stem.to_string(),
        partition: g.partition,
        device_file: Some(path.display().to_string()),
        records,
        mismatches,
        first_mismatches: first,
        ignored_words: (dump.words() as u64).saturating_sub(gold_words),
    }
}

impl CheckReport {
    /// The report as terminal text: one line per output, then its first mismatches.
    pub fn to_text(&self) -> String {
        let mut s = String::new();
        for o in &self.outputs {
            let part = o
                .partition
                .map(|p| format!("partition {p}"))
                .unwrap_or_default();
            let verdict = if o.device_file.is_none() {
                "not checked (no dump)".to_string()
            } else if o.mismatches == 0 {
                "match".to_string()
            } else {
                format!("{} of {} records differ", o.mismatches, o.records)
            };
            s.push_str(&format!(
                "{:<18} {:<12} {:>9} records  {verdict}",
                o.output, part, o.records
            ));
            if o.ignored_words > 0 {
                s.push_str(&format!(
                    "  ({} words past the golden output ignored)",
                    o.ignored_words
                ));
            }
            s.push('\n');
            for m in &o.first_mismatches {
                s.push_str(&format!(
                    "    record {} (word {}, byte {}): expected {}, found {}\n",
                    m.record, m.word, m.byte_offset, m.expected, m.found
                ));
            }
            if o.mismatches as usize > o.first_mismatches.len() {
                s.push_str(&format!(
                    "    … and {} more\n",
                    o.mismatches as usize - o.first_mismatches.len()
                ));
            }
        }
        let unchecked = self
            .outputs
            .iter()
            .filter(|o| o.device_file.is_none())
            .count();
        s.push_str(&if self.matched && unchecked == 0 {
            "all outputs match\n".to_string()
        } else if self.matched {
            format!("every checked output matches; {unchecked} not checked\n")
        } else {
            "MISMATCH\n".to_string()
        });
        s
    }
}
