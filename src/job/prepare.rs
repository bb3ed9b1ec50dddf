//! Turning a parsed job into a checked plan before anything is written: the input source,
//! bound predicate, partitions, placement and the full memory map. Every bad-input error
//! a run can meet is found here.

use std::path::Path;

use crate::error::{Error, Result};
use crate::gen::{ColumnGen, Dist, Shape, Skew, TableGen};
use crate::image::ImageFormat;
use crate::job::spec::{ColumnSpec, JobSpec, KernelSpec, PlacementSpec, ScanSpec};
use crate::kernels::predicate::{self, Bound};
use crate::kernels::scan::{ScanOutput, ScanParams};
use crate::layout::{self, MemoryMap, Placement};
use crate::table::{self, ElemType, QFormat, Table};

/// Where the input rows come from.
#[derive(Debug, Clone)]
pub enum Source {
    /// Generated on demand, partition by partition.
    Gen(TableGen),
    /// Read from files (CSV, `.npy`, `.bin`) before the run.
    Loaded(Table),
}

impl Source {
    /// Total rows.
    pub fn rows(&self) -> u64 {
        match self {
            Source::Gen(g) => g.rows,
            Source::Loaded(t) => t.rows() as u64,
        }
    }

    /// (name, type) of every column.
    pub fn schema(&self) -> Vec<(String, ElemType)> {
        match self {
            Source::Gen(g) => g.schema(),
            Source::Loaded(t) => t.schema(),
        }
    }

    /// Rows `range` as a table.
    pub fn rows_of(&self, range: std::ops::Range<u64>) -> Table {
        match self {
            Source::Gen(g) => g.generate(range),
            Source::Loaded(t) => t.slice(range.start as usize..range.end as usize),
        }
    }
}

/// One partition's plan.
#[derive(Debug, Clone)]
pub struct PartPlan {
    /// Global rows.
    pub rows: std::ops::Range<u64>,
    /// Channel.
    pub channel: u32,
}

/// A checked job, ready to run.
#[derive(Debug, Clone)]
pub struct Prepared {
    /// The job with defaults (and generator bounds taken from the predicate) filled in.
    pub spec: JobSpec,
    /// Input rows.
    pub source: Source,
    /// Input schema.
    pub schema: Vec<(String, ElemType)>,
    /// Scan parameters.
    pub scan: ScanParams,
    /// Partitions.
    pub parts: Vec<PartPlan>,
    /// Every region on the device.
    pub map: MemoryMap,
    /// Row-major (interleaved) input images.
    pub row_major: bool,
    /// Image formats to write.
    pub formats: Vec<ImageFormat>,
    /// Fixed-point format of each column given in the job (by job column order).
    pub q: Vec<Option<QFormat>>,
}

/// The kernel name used in file names and the ledger.
pub const SCAN: &str = "scan";

/// Region name of partition `p`'s input column (or `rows` for row-major records).
pub fn input_region(table: &str, p: usize, col: &str) -> String {
    format!("{table}.p{p}.{col}")
}

/// Region name of engine `p`'s output (`out`) or count word (`count`).
pub fn output_region(kernel: &str, p: usize, what: &str) -> String {
    format!("{kernel}.p{p}.{what}")
}

fn is_identifier(s: &str) -> bool {
    let mut c = s.chars();
    matches!(c.next(), Some(ch) if ch.is_ascii_alphabetic() || ch == '_')
        && c.all(|ch| ch.is_ascii_alphanumeric() || ch == '_')
}

/// Checks and plans `spec`; relative file paths are taken from `job_dir`.
pub fn prepare(spec: &JobSpec, job_dir: &Path) -> Result<Prepared> {
    let mut spec = spec.clone();
    let KernelSpec::Scan(scan_spec) = spec.kernel.clone();
    let l = spec.layout.clone();
    let word_bytes = layout::word_bytes(l.word_bits)?;
    if l.partitions == 0 {
        return Err(Error::input("layout.partitions must be at least 1"));
    }
    let formats = spec
        .output
        .formats
        .iter()
        .map(|f| match f.as_str() {
            "hex" => Ok(ImageFormat::Hex),
            "bin" => Ok(ImageFormat::Bin),
            "npy" => Ok(ImageFormat::Npy),
            other => Err(Error::input(format!(
                "output.formats: unknown format `{other}` (expected hex, bin or npy)"
            ))),
        })
        .collect::<Result<Vec<_>>>()?;
    let row_major = match l.order.as_str() {
        "column" => false,
        "row" => true,
        o => {
            return Err(Error::input(format!(
                "layout.order: `{o}` (expected column or row)"
            )))
        }
    };

    // Files are read first (their schema is the table's); generator bounds may come from
    // the predicate, so generators are built after binding it.
    let loaded = load_files(&spec, job_dir)?;
    let schema: Vec<(String, ElemType)> = match (&loaded, spec.input.generator.as_deref()) {
        (Some(t), _) => t.schema(),
        (None, Some("telemetry")) => crate::gen::telemetry::SCHEMA
            .iter()
            .map(|(n, t)| (n.to_string(), *t))
            .collect(),
        (None, _) => spec
            .input
            .columns
            .iter()
            .map(|c| (c.name.clone(), c.ty))
            .collect(),
    };
    let pred = predicate::compile(&scan_spec.predicate, &schema)
        .map_err(|e| Error::input(format!("kernel.predicate: {e}\n{}", e.caret())))?;
    let source = match loaded {
        Some(t) => Source::Loaded(t),
        None => Source::Gen(build_gen(&mut spec, &schema, &pred)?),
    };
    for (name, ty) in &schema {
        if !is_identifier(name) {
            return Err(Error::input(format!(
                "column `{name}`: names must be identifiers ([A-Za-z_][A-Za-z0-9_]*) so they can name Verilog parameters"
            )));
        }
        layout::check_elem_fits_word(*ty, l.word_bits, &format!("column `{name}`"))?;
        if row_major && ty.is_sub_byte() {
            return Err(Error::input(format!(
                "column `{name}`: sub-byte type {ty} cannot be interleaved in a row-major image; use order = \"column\""
            )));
        }
    }
    let scan = scan_params(&scan_spec, &schema, pred, source.rows())?;
    let types: Vec<ElemType> = schema.iter().map(|(_, t)| *t).collect();
    let q = spec
        .input
        .columns
        .iter()
        .map(|c| {
            c.q.as_deref()
                .map(|text| {
                    let q = table::parse_q(text)
                        .map_err(|m| Error::input(format!("input.columns `{}`: {m}", c.name)))?;
                    q.check(c.ty)
                        .map_err(|m| Error::input(format!("input.columns `{}`: {m}", c.name)))?;
                    Ok(q)
                })
                .transpose()
        })
        .collect::<Result<Vec<_>>>()?;

    // Partitions and placement.
    let bits: Vec<u32> = schema.iter().map(|(_, t)| t.bits()).collect();
    let g = layout::granule(l.word_bits, &bits, row_major);
    let rows = source.rows();
    let ranges = match &l.partition_rows {
        None => layout::split_rows(rows, l.partitions, g)?,
        Some(counts) => explicit_split(counts, l.partitions, rows, g)?,
    };
    let placement = match &l.placement {
        PlacementSpec::Name(n) => Placement::parse(n)?,
        PlacementSpec::List(v) => Placement::Explicit(v.clone()),
    };
    let channels = placement.channels(l.partitions, l.channels)?;
    let mut map = MemoryMap::new(word_bytes, l.channels, l.channel_mib << 20)?;
    let table = &spec.input.table;
    for (p, r) in ranges.iter().enumerate() {
        let n = r.end - r.start;
        if row_major {
            let rec: u64 = bits.iter().map(|&b| u64::from(b / 8)).sum();
            map.place(&input_region(table, p, "rows"), channels[p], n * rec)?;
        } else {
            for (name, ty) in &schema {
                map.place(
                    &input_region(table, p, name),
                    channels[p],
                    table::byte_len(*ty, n),
                )?;
            }
        }
    }
    for (p, r) in ranges.iter().enumerate() {
        let cap = scan.capacity_bytes(&types, r.end - r.start);
        map.place(&output_region(SCAN, p, "out"), channels[p], cap)?;
        map.place(
            &output_region(SCAN, p, "count"),
            channels[p],
            crate::kernels::scan::COUNT_BYTES,
        )?;
    }
    let parts = ranges
        .into_iter()
        .zip(channels)
        .map(|(rows, channel)| PartPlan { rows, channel })
        .collect();
    Ok(Prepared {
        spec,
        source,
        schema,
        scan,
        parts,
        map,
        row_major,
        formats,
        q,
    })
}

fn explicit_split(
    counts: &[u64],
    partitions: u32,
    rows: u64,
    g: u64,
) -> Result<Vec<std::ops::Range<u64>>> {
    if counts.len() != partitions as usize {
        return Err(Error::input(format!(
            "layout.partition_rows lists {} counts for {partitions} partitions",
            counts.len()
        )));
    }
    let total: u64 = counts.iter().sum();
    if total != rows {
        return Err(Error::input(format!(
            "layout.partition_rows adds up to {total} rows, the input has {rows}"
        )));
    }
    let mut start = 0;
    let mut out = Vec::new();
    for (p, &n) in counts.iter().enumerate() {
        if p + 1 < counts.len() && n % g != 0 {
            return Err(Error::input(format!(
                "layout.partition_rows: partition {p} has {n} rows, not a multiple of {g} (rows per whole word), so partition {} would not start on a word boundary",
                p + 1
            )));
        }
        out.push(start..start + n);
        start += n;
    }
    Ok(out)
}

fn scan_params(
    s: &ScanSpec,
    schema: &[(String, ElemType)],
    predicate: Bound,
    rows: u64,
) -> Result<ScanParams> {
    let col_index = |name: &str| {
        schema
            .iter()
            .position(|(n, _)| n == name)
            .ok_or_else(|| Error::input(format!("kernel.project: unknown column `{name}`")))
    };
    let output = match s.output.as_str() {
        "row_ids" => ScanOutput::RowIds,
        "bitmap" => ScanOutput::Bitmap,
        "project" => {
            if s.project.is_empty() {
                return Err(Error::input("kernel.project: list the columns to project"));
            }
            let cols = s
                .project
                .iter()
                .map(|c| col_index(c))
                .collect::<Result<Vec<_>>>()?;
            if let Some(&c) = cols.iter().find(|&&c| schema[c].1.is_sub_byte()) {
                return Err(Error::input(format!(
                    "kernel.project: sub-byte column `{}` cannot be projected into records",
                    schema[c].0
                )));
            }
            ScanOutput::Project(cols)
        }
        o => {
            return Err(Error::input(format!(
                "kernel.output: `{o}` (expected row_ids, bitmap or project)"
            )))
        }
    };
    let global_ids = match s.row_ids.as_str() {
        "global" => true,
        "local" => false,
        o => {
            return Err(Error::input(format!(
                "kernel.row_ids: `{o}` (expected global or local)"
            )))
        }
    };
    Ok(ScanParams {
        predicate: crate::kernels::scan::fuse_ranges(&predicate, schema),
        output,
        global_ids,
        wide_ids: rows > u64::from(u32::MAX),
    })
}

/// The table read from the job's CSV or column files, if it names any.
fn load_files(spec: &JobSpec, job_dir: &Path) -> Result<Option<Table>> {
    let input = &spec.input;
    if let Some(csv) = &input.csv {
        let path = job_dir.join(csv);
        let given: Option<Vec<(String, ElemType)>> = (!input.columns.is_empty()).then(|| {
            input
                .columns
                .iter()
                .map(|c| (c.name.clone(), c.ty))
                .collect()
        });
        return table::read_csv(&path, &input.table, given.as_deref()).map(Some);
    }
    let from_files = input.columns.iter().filter(|c| c.file.is_some()).count();
    if from_files == 0 {
        return Ok(None);
    }
    if from_files != input.columns.len() {
        return Err(Error::input(
            "input.columns: either every column has a file or none does",
        ));
    }
    let mut cols = Vec::new();
    for c in &input.columns {
        let path = job_dir.join(c.file.as_ref().expect("checked above"));
        let col = match path.extension().and_then(|e| e.to_str()) {
            Some("npy") => table::read_npy_column(&path, &c.name, Some(c.ty))?,
            Some("bin") => table::read_bin_column(&path, &c.name, c.ty)?,
            _ => {
                return Err(Error::input(format!(
                    "{}: column files must end in .npy or .bin",
                    path.display()
                )))
            }
        };
        cols.push(col);
    }
    Table::new(&input.table, cols)
        .map(Some)
        .map_err(Error::input)
}

/// The generator the job describes (telemetry, or one generator per column).
fn build_gen(spec: &mut JobSpec, schema: &[(String, ElemType)], pred: &Bound) -> Result<TableGen> {
    let input = &mut spec.input;
    let table = input.table.clone();
    let rows = input
        .rows
        .ok_or_else(|| Error::input("input.rows: generated tables need a row count"))?;
    match input.generator.as_deref() {
        Some("telemetry") => {
            let turbines = *input.turbines.get_or_insert(64);
            return Ok(TableGen {
                table,
                rows,
                seed: input.seed,
                shape: Shape::Telemetry { turbines },
            });
        }
        None | Some("columns") => {}
        Some(g) => {
            return Err(Error::input(format!(
                "input.generator: unknown generator `{g}` (expected columns or telemetry)"
            )))
        }
    }
    if input.columns.is_empty() {
        return Err(Error::input(
            "input: give columns (generated or from files) or a csv file",
        ));
    }
    let ranges = pred.ranges(schema);
    let mut gens = Vec::new();
    for (i, c) in input.columns.iter_mut().enumerate() {
        let range = ranges
            .as_ref()
            .and_then(|rs| rs.iter().find(|r| r.col == i));
        let g = column_gen(c, range.map(|r| (r.lo, r.hi)))?;
        g.validate().map_err(Error::input)?;
        gens.push(g);
    }
    Ok(TableGen {
        table,
        rows,
        seed: input.seed,
        shape: Shape::Columns(gens),
    })
}

/// Builds a column generator, filling `lo`/`hi` of a `select` column from the predicate's
/// inclusive integer range `(lo, hi)` when the job leaves them out.
fn column_gen(c: &mut ColumnSpec, pred_range: Option<(i128, i128)>) -> Result<ColumnGen> {
    let n = c.name.clone();
    let need = |v: Option<f64>, key: &str| {
        v.ok_or_else(|| {
            Error::input(format!(
                "input.columns `{n}`: `{key}` is required for dist = \"{}\"",
                c.dist.as_deref().unwrap_or("")
            ))
        })
    };
    let (tmin, tmax) = if c.ty.is_float() {
        (f64::NEG_INFINITY, f64::INFINITY)
    } else {
        let (a, b) = c.ty.int_range();
        (a as f64, b as f64)
    };
    // Integer select columns default to the type's limits; float ones must say.
    let limit = |v: Option<f64>, type_limit: f64, key: &str| {
        v.or((!c.ty.is_float()).then_some(type_limit))
            .ok_or_else(|| {
                Error::input(format!(
                    "input.columns `{n}`: `{key}` is required for a float select column"
                ))
            })
    };
    let dist = match c.dist.as_deref() {
        Some("uniform") => Dist::Uniform {
            min: need(c.min, "min")?,
            max: need(c.max, "max")?,
        },
        Some("normal") => Dist::Normal {
            mean: need(c.mean, "mean")?,
            sd: need(c.sd, "sd")?,
            min: c.min.unwrap_or(tmin),
            max: c.max.unwrap_or(tmax),
        },
        Some("sequence") => Dist::Sequence {
            start: c.start.unwrap_or(0.0),
            step: c.step.unwrap_or(1.0),
        },
        Some("select") => {
            if let (None, Some((lo, hi))) = (c.lo, pred_range) {
                c.lo = Some(lo as f64);
                c.hi = Some((hi + 1) as f64);
            }
            let skew = match c.skew.as_deref() {
                None | Some("uniform") => Skew::Uniform,
                Some("zipf") => Skew::Zipf {
                    theta: need(c.theta, "theta")?,
                    distinct: c.distinct.unwrap_or(1000),
                },
                Some(o) => {
                    return Err(Error::input(format!(
                        "input.columns `{n}`: skew `{o}` (expected uniform or zipf)"
                    )))
                }
            };
            Dist::Select {
                selectivity: need(c.selectivity, "selectivity")?,
                lo: need(c.lo, "lo")?,
                hi: need(c.hi, "hi")?,
                min: limit(c.min, tmin, "min")?,
                max: limit(c.max, tmax, "max")?,
                skew,
            }
        }
        Some(o) => {
            return Err(Error::input(format!(
                "input.columns `{n}`: dist `{o}` (expected uniform, normal, sequence or select)"
            )))
        }
        None => {
            return Err(Error::input(format!(
                "input.columns `{n}`: give a `dist` (or a `file`)"
            )))
        }
    };
    Ok(ColumnGen {
        name: c.name.clone(),
        ty: c.ty,
        dist,
        corners: c.corners,
    })
}
