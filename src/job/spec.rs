//! The job file (TOML): what to generate or read, how to lay it out, which kernel to run
//! and which formats to write. Every table rejects unknown keys, so a typo is an error.
//! After loading, defaults are filled in; the resolved job is what the manifest records.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::kernels::KernelConfig;
use crate::table::ElemType;

/// A whole job.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct JobSpec {
    /// Job name (used in headers of generated files).
    #[serde(default = "default_name")]
    pub name: String,
    /// The input table of a one-table job (`[input]`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub input: Option<InputSpec>,
    /// The input tables of a several-table job (`[tables.NAME]`), by name.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub tables: BTreeMap<String, InputSpec>,
    /// Layout and placement.
    #[serde(default)]
    pub layout: LayoutSpec,
    /// The kernel and its parameters.
    pub kernel: KernelConfig,
    /// What to write.
    #[serde(default)]
    pub output: OutputSpec,
}

fn default_name() -> String {
    "job".into()
}

/// An input table: a generator, a CSV file, or one `.npy`/`.bin` file per column.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct InputSpec {
    /// Table name of `[input]` (default `t`); a `[tables.NAME]` section is named by NAME.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub table: Option<String>,
    /// Rows to generate.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rows: Option<u64>,
    /// Generator seed.
    #[serde(default = "default_seed")]
    pub seed: u64,
    /// `columns` (each column has a `dist`), `telemetry` (the demo's readings table) or
    /// `samples` (training samples from a linear model, described by `[….samples]`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub generator: Option<String>,
    /// Turbines, for the `telemetry` generator.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub turbines: Option<u32>,
    /// The linear model of the `samples` generator.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub samples: Option<SamplesSpec>,
    /// A CSV file holding the whole table (relative to the job file).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub csv: Option<PathBuf>,
    /// The columns.
    #[serde(default)]
    pub columns: Vec<ColumnSpec>,
}

/// The `samples` generator: `features` standard-normal features (feature j scaled by
/// `scale[j mod len]`), true weights drawn from N(0, 1), and the label `y` from the model.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct SamplesSpec {
    /// Features d.
    pub features: u32,
    /// `regression` (y = w·x + b + ε), `logistic` (y ∈ {0, 1}) or `margin` (y ∈ {−1, +1}).
    #[serde(default = "regression")]
    pub labels: String,
    /// Standard deviation of ε.
    #[serde(default)]
    pub noise: f64,
    /// True bias b.
    #[serde(default)]
    pub bias: f64,
    /// Per-feature scales, repeated cyclically.
    #[serde(default = "unit_scale")]
    pub scale: Vec<f64>,
    /// Store every column in this signed fixed-point format (`Qi.f`, at most 24 bits with
    /// the sign) instead of `f32`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub q: Option<String>,
}

fn regression() -> String {
    "regression".into()
}

fn unit_scale() -> Vec<f64> {
    vec![1.0]
}

/// The table name of a one-table job that gives none.
pub const DEFAULT_TABLE: &str = "t";

fn default_seed() -> u64 {
    1
}

/// One input column: a generated distribution or a file.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct ColumnSpec {
    /// Column name: a Verilog-safe identifier.
    pub name: String,
    /// Element type.
    #[serde(rename = "type")]
    pub ty: ElemType,
    /// Fixed-point format of a signed column, as `Qi.f`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub q: Option<String>,
    /// `.npy` or `.bin` file holding the column (relative to the job file).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub file: Option<PathBuf>,
    /// Distribution: `uniform`, `normal`, `sequence` or `select`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub dist: Option<String>,
    /// Lower limit of values (uniform, normal, select).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub min: Option<f64>,
    /// Upper limit of values (uniform, normal, select).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max: Option<f64>,
    /// Mean (normal).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mean: Option<f64>,
    /// Standard deviation (normal).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sd: Option<f64>,
    /// First value (sequence).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub start: Option<f64>,
    /// Increment per row (sequence).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub step: Option<f64>,
    /// Requested fraction of rows in the match range (select).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub selectivity: Option<f64>,
    /// Match range start, inclusive (select; default from the scan predicate).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lo: Option<f64>,
    /// Match range end, exclusive (select; default from the scan predicate).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub hi: Option<f64>,
    /// `uniform` or `zipf` (select).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub skew: Option<String>,
    /// Zipf exponent θ (select with skew = zipf).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub theta: Option<f64>,
    /// Distinct values per side under Zipf skew.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub distinct: Option<u64>,
    /// Plant corner rows (bounds, type limits, NaN, ±0, ±∞).
    #[serde(default)]
    pub corners: bool,
}

/// Layout and placement of partitions on device channels.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields, default)]
pub struct LayoutSpec {
    /// Memory word width in bits.
    pub word_bits: u32,
    /// Partitions (= engines).
    pub partitions: u32,
    /// Device channels.
    pub channels: u32,
    /// Bytes per channel, in MiB.
    pub channel_mib: u64,
    /// `spread`, `packed`, or a list of channels, one per partition.
    pub placement: PlacementSpec,
    /// `column` (one image per column) or `row` (interleaved records).
    pub order: String,
    /// Explicit row count per partition (each but the last a multiple of the granule).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub partition_rows: Option<Vec<u64>>,
}

impl Default for LayoutSpec {
    fn default() -> Self {
        LayoutSpec {
            word_bits: 512,
            partitions: 1,
            channels: 1,
            channel_mib: 256,
            placement: PlacementSpec::Name("spread".into()),
            order: "column".into(),
            partition_rows: None,
        }
    }
}

/// A placement: a name or an explicit list.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(untagged)]
pub enum PlacementSpec {
    /// `spread` or `packed`.
    Name(String),
    /// Channel of each partition.
    List(Vec<u32>),
}

/// Output files.
#[derive(Debug, Clone, Deserialize, Serialize, PartialEq)]
#[serde(deny_unknown_fields, default)]
pub struct OutputSpec {
    /// Image formats for inputs and golden outputs: any of `hex`, `bin`, `npy`.
    pub formats: Vec<String>,
    /// Also write one hex image per channel with `@address` lines.
    pub channel_images: bool,
    /// Also write the typed input columns as `.npy` arrays (for Python testbenches).
    pub typed_npy: bool,
}

impl Default for OutputSpec {
    fn default() -> Self {
        OutputSpec {
            formats: vec!["hex".into(), "npy".into()],
            channel_images: true,
            typed_npy: true,
        }
    }
}

impl JobSpec {
    /// Parses a job from TOML text; `origin` names the file in errors.
    pub fn from_toml(text: &str, origin: &Path) -> Result<JobSpec> {
        toml::from_str(text).map_err(|e| {
            // toml's message spans several lines with a source excerpt; keep the first
            // line and the position, which name the key.
            let msg = e.message().to_string();
            let at = e
                .span()
                .map(|s| {
                    let line = text[..s.start].matches('\n').count() + 1;
                    format!(", line {line}")
                })
                .unwrap_or_default();
            Error::input(format!("{}{at}: {msg}", origin.display()))
        })
    }

    /// Every input table as (name, spec), with `[input]` named by its `table` key.
    pub fn table_specs(&self) -> Result<Vec<(String, &InputSpec)>> {
        match (&self.input, self.tables.is_empty()) {
            (Some(i), true) => Ok(vec![(
                i.table.clone().unwrap_or_else(|| DEFAULT_TABLE.into()),
                i,
            )]),
            (None, false) => self
                .tables
                .iter()
                .map(|(name, t)| match &t.table {
                    Some(other) if other != name => Err(Error::input(format!(
                        "tables.{name}: `table = \"{other}\"` differs from the section name; leave it out"
                    ))),
                    _ => Ok((name.clone(), t)),
                })
                .collect(),
            (Some(_), false) => Err(Error::input(
                "the job has both [input] and [tables.*]; use [input] for one table, [tables.NAME] for several",
            )),
            (None, true) => Err(Error::input(
                "the job has no input: give an [input] table or [tables.NAME] tables",
            )),
        }
    }

    /// Mutable specs of every input table, in [`JobSpec::table_specs`] order.
    pub fn table_specs_mut(&mut self) -> Vec<&mut InputSpec> {
        match &mut self.input {
            Some(i) => vec![i],
            None => self.tables.values_mut().collect(),
        }
    }

    /// Sets the generator seed of every table (`--seeds`).
    pub fn set_seed(&mut self, seed: u64) {
        for t in self.table_specs_mut() {
            t.seed = seed;
        }
    }

    /// Reads and parses a job file.
    pub fn load(path: &Path) -> Result<JobSpec> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::read(path, e))?;
        JobSpec::from_toml(&text, path)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const MIN: &str = "[input]\nrows = 10\n[[input.columns]]\nname = \"v\"\ntype = \"u32\"\ndist = \"uniform\"\nmin = 0\nmax = 9\n[kernel]\nname = \"scan\"\npredicate = \"v < 3\"\n";

    #[test]
    fn defaults_fill_in() {
        let j = JobSpec::from_toml(MIN, Path::new("j.toml")).unwrap();
        assert_eq!(j.layout.word_bits, 512);
        assert_eq!(j.output.formats, vec!["hex", "npy"]);
        let KernelConfig::Scan(s) = &j.kernel else {
            panic!("a scan job")
        };
        assert_eq!(s.output, "row_ids");
        assert_eq!(j.table_specs().unwrap()[0].0, "t");
    }

    #[test]
    fn several_tables_are_named_by_their_sections() {
        let text = MIN
            .replace("[input]", "[tables.b]")
            .replace("[[input.columns]]", "[[tables.b.columns]]")
            + "[tables.a]\nrows = 1\n";
        let j = JobSpec::from_toml(&text, Path::new("j.toml")).unwrap();
        let names: Vec<String> = j.table_specs().unwrap().into_iter().map(|t| t.0).collect();
        assert_eq!(names, ["a", "b"]);
        let both = format!("{MIN}[tables.a]\nrows = 1\n");
        let j = JobSpec::from_toml(&both, Path::new("j.toml")).unwrap();
        assert!(j
            .table_specs()
            .unwrap_err()
            .to_string()
            .contains("both [input] and [tables.*]"));
    }

    #[test]
    fn unknown_keys_are_errors_with_line() {
        let text = MIN.replace("[kernel]", "[layout]\nword_bit = 64\n[kernel]");
        let e = JobSpec::from_toml(&text, Path::new("j.toml"))
            .unwrap_err()
            .to_string();
        assert!(
            e.starts_with("j.toml, line 10: unknown field `word_bit`"),
            "{e}"
        );
        let text = MIN.replace("predicate", "predicat");
        let e = JobSpec::from_toml(&text, Path::new("j.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("unknown field `predicat`"), "{e}");
        let text = MIN.replace("\"scan\"", "\"scna\"");
        let e = JobSpec::from_toml(&text, Path::new("j.toml"))
            .unwrap_err()
            .to_string();
        assert!(e.contains("unknown variant `scna`"), "{e}");
    }
}
