//! `manifest.json`: what a run wrote and how to read it back — the job as run, and for
//! every file its role, place in memory, shape, format and SHA-256. The checker and
//! `weir inspect` work from it alone.

use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// Format version of `manifest.json`.
pub const MANIFEST_FORMAT_VERSION: u32 = 1;

/// The manifest file's name inside an output directory.
pub const MANIFEST_FILE: &str = "manifest.json";

/// What a file is for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Role {
    /// An input memory image or typed input array.
    Input,
    /// An expected output (output region or count word).
    Golden,
    /// The byte ledger.
    Ledger,
    /// The memory map.
    Map,
}

impl Role {
    /// The name shown in tables.
    pub fn name(self) -> &'static str {
        match self {
            Role::Input => "input",
            Role::Golden => "golden",
            Role::Ledger => "ledger",
            Role::Map => "map",
        }
    }
}

/// One file of the run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct FileEntry {
    /// Path relative to the output directory, `/`-separated.
    pub path: String,
    /// Role.
    pub role: Option<Role>,
    /// `hex`, `bin`, `npy` (memory words), `npy-typed` (typed array), `json`, `csv`, `vh`.
    pub format: String,
    /// Kernel that produced or reads the file.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub kernel: Option<String>,
    /// Table name.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub table: Option<String>,
    /// Column name, `rows` for a row-major record image, or the output name (`out`, `count`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub column: Option<String>,
    /// Partition (= engine).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub partition: Option<u32>,
    /// Channel.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub channel: Option<u32>,
    /// Base byte address on the channel.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub base: Option<u64>,
    /// Global row range `[start, end)`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rows: Option<[u64; 2]>,
    /// Element type (`u32`, …), `record` for row-major or projected records, `bits` for bitmaps.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub elem: Option<String>,
    /// Memory word width in bits.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub word_bits: Option<u32>,
    /// Memory words in the image.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub words: Option<u64>,
    /// Payload bytes in the image (before padding).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub payload_bytes: Option<u64>,
    /// Zero bytes padding the last word.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub padding_bytes: Option<u64>,
    /// Records in a golden output (matches, rows of a bitmap).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub records: Option<u64>,
    /// Bytes per record in a golden output (0 for bitmaps).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub record_bytes: Option<u64>,
    /// The named fields of a golden record, in byte order; written only for records of
    /// several fields (projected columns, join pairs), so reports can show them by name.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fields: Option<Vec<FieldEntry>>,
    /// Bytes of the file.
    pub bytes: u64,
    /// SHA-256 of the file, lowercase hex.
    pub sha256: String,
}

/// One field of a golden record.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FieldEntry {
    /// Field name.
    pub name: String,
    /// Element type name (`u32`, `i64`, …).
    pub elem: String,
    /// Width in bits.
    pub bits: u32,
}

/// The whole manifest.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Manifest {
    /// [`MANIFEST_FORMAT_VERSION`].
    pub format_version: u32,
    /// Version of weir that wrote it.
    pub tool_version: String,
    /// The job as run, after defaults.
    pub job: serde_json::Value,
    /// Memory word width of every image.
    pub word_bits: u32,
    /// Every file written, in writing order.
    pub files: Vec<FileEntry>,
}

impl Manifest {
    /// Reads `DIR/manifest.json`, checking its version.
    pub fn load(dir: &Path) -> Result<Manifest> {
        let p = dir.join(MANIFEST_FILE);
        let text = std::fs::read_to_string(&p).map_err(|e| Error::read(&p, e))?;
        let m: Manifest = serde_json::from_str(&text)
            .map_err(|e| Error::input(format!("{}: {e}", p.display())))?;
        if m.format_version != MANIFEST_FORMAT_VERSION {
            return Err(Error::input(format!(
                "{}: format_version {} is not supported (this weir reads {MANIFEST_FORMAT_VERSION})",
                p.display(),
                m.format_version
            )));
        }
        m.validate().map_err(|e| e.context(p.display()))?;
        Ok(m)
    }

    /// Checks what readers rely on: every path is relative and stays inside the directory
    /// (no `..`, no root, no empty part), and every checksum is 64 lowercase hex digits.
    pub fn validate(&self) -> Result<()> {
        for (i, f) in self.files.iter().enumerate() {
            let inside = !f.path.is_empty()
                && !f.path.starts_with('/')
                && f.path
                    .split('/')
                    .all(|c| !c.is_empty() && c != "." && c != "..")
                && !f.path.contains('\\')
                && !Path::new(&f.path).is_absolute();
            if !inside {
                return Err(Error::input(format!(
                    "files[{i}]: path `{}` must be relative and inside the run directory",
                    f.path
                )));
            }
            let hex = f.sha256.len() == 64
                && f.sha256
                    .bytes()
                    .all(|b| matches!(b, b'0'..=b'9' | b'a'..=b'f'));
            if !hex {
                return Err(Error::input(format!(
                    "files[{i}] ({}): sha256 `{}` is not 64 lowercase hex digits",
                    f.path,
                    f.sha256.escape_debug()
                )));
            }
        }
        Ok(())
    }

    /// Pretty JSON text with a final newline.
    pub fn to_json(&self) -> String {
        let mut s = serde_json::to_string_pretty(self).expect("manifest serializes");
        s.push('\n');
        s
    }

    /// Recomputes every file's SHA-256; returns the files whose bytes differ or are missing.
    pub fn verify(&self, dir: &Path) -> Vec<(String, String)> {
        let mut bad = Vec::new();
        for f in &self.files {
            match std::fs::read(dir.join(&f.path)) {
                Ok(b) => {
                    let h = crate::job::sha256_hex(&b);
                    if h != f.sha256 {
                        bad.push((
                            f.path.clone(),
                            format!("sha256 {h}, manifest says {}", f.sha256),
                        ));
                    }
                }
                Err(e) => bad.push((f.path.clone(), e.to_string())),
            }
        }
        bad
    }
}
