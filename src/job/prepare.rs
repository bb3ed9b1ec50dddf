//! Turning a parsed job into a checked plan before anything is written: the input tables,
//! the bound kernel, partitions, placement and the full memory map. Every bad-input error
//! a run can meet is found here. Nothing here knows a kernel: the plan follows what the
//! bound kernel declares (its tables and how engines share them, its regions).

use std::path::Path;
use std::sync::Arc;

use crate::error::{Error, Result};
use crate::gen::{ColumnGen, Dist, SamplesGen, SamplesKeys, Shape, Skew, TableGen};
use crate::image::ImageFormat;
use crate::job::spec::{ColumnSpec, InputSpec, JobSpec, LayoutSpec, PlacementSpec, DEFAULT_TABLE};
use crate::kernels::seam::{Kernel, RegionNeed, Share, TableSchema};
use crate::layout::{self, MemoryMap, Placed, Placement, RegionId};
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

/// One input table of the job, as the kernel reads it.
#[derive(Debug)]
pub struct InputTable {
    /// Table name.
    pub name: String,
    /// How the engines share it.
    pub share: Share,
    /// Where its rows come from.
    pub source: Source,
    /// (column, type) in table order.
    pub schema: Vec<(String, ElemType)>,
    /// Fixed-point format of each column given in the job (by job column order).
    pub q: Vec<Option<QFormat>>,
    /// The whole table, for a replicated table (every engine reads it).
    pub whole: Option<Table>,
}

/// One engine's plan.
#[derive(Debug, Clone)]
pub struct EnginePlan {
    /// The channel its partitions and regions live on.
    pub channel: u32,
    /// Global rows it reads of each input table (kernel input order; a replicated table
    /// is read whole).
    pub rows: Vec<std::ops::Range<u64>>,
    /// The regions its kernel declared, in declaration order.
    pub regions: Vec<RegionNeed>,
}

/// A checked job, ready to run.
#[derive(Debug)]
pub struct Prepared {
    /// The job with defaults (and generator bounds taken from the kernel) filled in.
    pub spec: JobSpec,
    /// The bound kernel.
    pub kernel: Arc<dyn Kernel>,
    /// Input tables in kernel input order.
    pub tables: Vec<InputTable>,
    /// Engines (= partitions).
    pub engines: Vec<EnginePlan>,
    /// Every region on the device.
    pub map: MemoryMap,
    /// Row-major (interleaved) input images.
    pub row_major: bool,
    /// Image formats to write.
    pub formats: Vec<ImageFormat>,
}

impl Prepared {
    /// The region of `id`; every region was placed by [`prepare`].
    pub fn region(&self, id: &RegionId) -> &Placed {
        self.map
            .get(id)
            .expect("every region was placed in prepare")
    }

    /// The image names of table `t` (its columns, or `rows` for a row-major record image).
    pub fn image_columns(&self, t: &InputTable) -> Vec<String> {
        if self.row_major {
            vec![ROWS.into()]
        } else {
            t.schema.iter().map(|(n, _)| n.clone()).collect()
        }
    }

    /// The region holding engine `e`'s image `column` of table `t` (its partition, or the
    /// replica on its channel).
    pub fn input_id(&self, t: &InputTable, e: usize, column: &str) -> RegionId {
        match t.share {
            Share::Partitioned => RegionId::Input {
                table: t.name.clone(),
                part: e as u32,
                column: column.into(),
            },
            Share::Replicated => RegionId::Replica {
                table: t.name.clone(),
                channel: self.engines[e].channel,
                column: column.into(),
            },
        }
    }

    /// The region of engine `e`'s declared region `r`.
    pub fn output_id(&self, e: usize, r: usize) -> RegionId {
        RegionId::Output {
            kernel: self.kernel.name().into(),
            engine: e as u32,
            name: self.engines[e].regions[r].name.clone(),
        }
    }

    /// Channels hosting at least one engine, ascending.
    pub fn engine_channels(&self) -> Vec<u32> {
        let mut c: Vec<u32> = self.engines.iter().map(|e| e.channel).collect();
        c.sort_unstable();
        c.dedup();
        c
    }
}

/// The image name of a row-major record image.
pub const ROWS: &str = "rows";

fn is_identifier(s: &str) -> bool {
    let mut c = s.chars();
    matches!(c.next(), Some(ch) if ch.is_ascii_alphabetic() || ch == '_')
        && c.all(|ch| ch.is_ascii_alphanumeric() || ch == '_')
}

/// Checks that `name` is an identifier: names reach file names and Verilog parameters,
/// so nothing else (no `/`, no `..`) may pass.
fn check_identifier(what: &str, name: &str) -> Result<()> {
    if is_identifier(name) {
        Ok(())
    } else {
        Err(Error::input(format!(
            "{what} `{name}`: names must be identifiers ([A-Za-z_][A-Za-z0-9_]*) so they can name files and Verilog parameters"
        )))
    }
}

/// Checks that no two of `names` differ only in case (Verilog parameters are made from
/// upper-cased names).
fn check_unique(what: &str, names: &[&str]) -> Result<()> {
    for (i, a) in names.iter().enumerate() {
        if let Some(b) = names[..i].iter().find(|b| b.eq_ignore_ascii_case(a)) {
            return Err(Error::input(format!(
                "{what} `{b}` and `{a}` differ only in case; their Verilog parameters would clash"
            )));
        }
    }
    Ok(())
}

/// Checks and plans `spec`; relative file paths are taken from `job_dir`.
pub fn prepare(spec: &JobSpec, job_dir: &Path) -> Result<Prepared> {
    let mut spec = spec.clone();
    if let Some(i) = &mut spec.input {
        i.table.get_or_insert_with(|| DEFAULT_TABLE.into());
    }
    crate::job::limits::check(&spec)?;
    let l = spec.layout.clone();
    let word_bytes = layout::word_bytes(l.word_bits).map_err(|e| e.context("layout.word_bits"))?;
    let formats = image_formats(&spec.output.formats)?;
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
    // the kernel, so generators are built after binding it.
    let mut found = Vec::new();
    for (name, t) in spec.table_specs()? {
        check_identifier("table", &name)?;
        let loaded = load_files(t, &name, job_dir)?;
        let schema = table_schema(t, loaded.as_ref())?;
        let rows = match &loaded {
            Some(t) => t.rows() as u64,
            None => t.rows.unwrap_or(0),
        };
        let q = q_formats(t, &schema, loaded.as_ref())?;
        found.push((name, loaded, schema, rows, q));
    }
    let names: Vec<&str> = found.iter().map(|f| f.0.as_str()).collect();
    check_unique("table", &names)?;
    for (name, _, schema, ..) in &found {
        let cols: Vec<&str> = schema.iter().map(|(n, _)| n.as_str()).collect();
        for (c, ty) in schema {
            check_identifier(&format!("table `{name}`: column"), c)?;
            layout::check_elem_fits_word(*ty, l.word_bits, &format!("column `{c}`"))?;
            if row_major && ty.is_sub_byte() {
                return Err(Error::input(format!(
                    "column `{c}`: sub-byte type {ty} cannot be interleaved in a row-major image; use order = \"column\""
                )));
            }
        }
        check_unique(&format!("table `{name}`: column"), &cols)?;
    }
    let schemas: Vec<TableSchema> = found
        .iter()
        .map(|(name, _, columns, rows, q)| TableSchema {
            name: name.clone(),
            columns: columns.clone(),
            rows: *rows,
            q: q.clone(),
        })
        .collect();
    let kernel = spec.kernel.bind(&schemas)?;
    let uses = kernel.inputs();
    if let Some((name, ..)) = found.iter().find(|f| !uses.iter().any(|u| u.table == f.0)) {
        return Err(Error::input(format!(
            "table `{name}` is not read by the {} kernel",
            kernel.name()
        )));
    }
    let mut specs = spec.table_specs_mut();
    let mut tables = Vec::new();
    for u in &uses {
        let k = found.iter().position(|f| f.0 == u.table).ok_or_else(|| {
            Error::input(format!("kernel: no input table is named `{}`", u.table))
        })?;
        let (name, schema) = (found[k].0.clone(), found[k].2.clone());
        let loaded = found[k].1.take();
        let input = &mut *specs[k];
        let source = match loaded {
            Some(t) => Source::Loaded(t),
            None => Source::Gen(build_gen(
                input,
                &name,
                &schema,
                &kernel.select_ranges(&name),
            )?),
        };
        let q = found[k].4.clone();
        if u.share == Share::Replicated {
            check_replica_fits(&name, &schema, source.rows(), l.channel_mib)?;
        }
        let whole = (u.share == Share::Replicated).then(|| source.rows_of(0..source.rows()));
        tables.push(InputTable {
            name,
            share: u.share,
            source,
            schema,
            q,
            whole,
        });
    }
    drop(specs);
    let (engines, map) = place(&l, word_bytes, row_major, &tables, kernel.as_ref())?;
    Ok(Prepared {
        spec,
        kernel,
        tables,
        engines,
        map,
        row_major,
        formats,
    })
}

fn image_formats(names: &[String]) -> Result<Vec<ImageFormat>> {
    names
        .iter()
        .map(|f| match f.as_str() {
            "hex" => Ok(ImageFormat::Hex),
            "bin" => Ok(ImageFormat::Bin),
            "npy" => Ok(ImageFormat::Npy),
            other => Err(Error::input(format!(
                "output.formats: unknown format `{other}` (expected hex, bin or npy)"
            ))),
        })
        .collect()
}

/// A replicated table is held whole (and copied to every engine channel), so it must fit
/// one channel: checked before a row of it is generated.
fn check_replica_fits(
    name: &str,
    schema: &[(String, ElemType)],
    rows: u64,
    channel_mib: u64,
) -> Result<()> {
    let bytes = schema
        .iter()
        .try_fold(0u64, |a, (_, ty)| a.checked_add(table::byte_len(*ty, rows)));
    let room = channel_mib.saturating_mul(1 << 20);
    match bytes {
        Some(b) if b <= room => Ok(()),
        _ => Err(Error::input(format!(
            "table `{name}`: {rows} rows are replicated on every engine channel but do not fit one channel of {channel_mib} MiB (layout.channel_mib)"
        ))),
    }
}

/// The schema of a table: its files', the telemetry or samples generator's, or the listed
/// columns.
fn table_schema(input: &InputSpec, loaded: Option<&Table>) -> Result<Vec<(String, ElemType)>> {
    Ok(match (loaded, input.generator.as_deref()) {
        (Some(t), _) => t.schema(),
        (None, Some("telemetry")) => crate::gen::telemetry::SCHEMA
            .iter()
            .map(|(n, t)| (n.to_string(), *t))
            .collect(),
        (None, Some("samples")) => {
            let (g, q) = samples_gen(input)?;
            g.schema(q)
        }
        (None, _) => input
            .columns
            .iter()
            .map(|c| (c.name.clone(), c.ty))
            .collect(),
    })
}

/// The `samples` generator of `input` and its columns' Q format.
fn samples_gen(input: &InputSpec) -> Result<(SamplesGen, Option<QFormat>)> {
    let s = input
        .samples
        .as_ref()
        .ok_or_else(|| Error::input("input: generator = \"samples\" needs a samples table"))?;
    SamplesKeys {
        features: s.features,
        labels: &s.labels,
        noise: s.noise,
        bias: s.bias,
        scale: &s.scale,
        q: s.q.as_deref(),
    }
    .build(input.rows.unwrap_or(0), input.seed)
    .map_err(Error::input)
}

/// The fixed-point format of each schema column: the job's `q`, else a CSV header's or the
/// samples generator's.
fn q_formats(
    input: &InputSpec,
    schema: &[(String, ElemType)],
    loaded: Option<&Table>,
) -> Result<Vec<Option<QFormat>>> {
    schema
        .iter()
        .enumerate()
        .map(|(i, (name, ty))| {
            let given = input.columns.iter().find(|c| &c.name == name);
            let Some(text) = given.and_then(|c| c.q.as_deref()) else {
                return Ok(match loaded {
                    Some(t) => t.columns[i].q,
                    None if input.generator.as_deref() == Some("samples") => samples_gen(input)?.1,
                    None => None,
                });
            };
            let err = |m: String| Error::input(format!("input.columns `{name}`: {m}"));
            let q = table::parse_q(text).map_err(err)?;
            q.check(*ty).map_err(err)?;
            Ok(Some(q))
        })
        .collect()
}

/// Splits the partitioned tables over the engines and places every region: first each
/// engine's partitions, then one copy of each replicated table per engine channel, then
/// the regions each engine's kernel declares.
fn place(
    l: &LayoutSpec,
    word_bytes: u64,
    row_major: bool,
    tables: &[InputTable],
    kernel: &dyn Kernel,
) -> Result<(Vec<EnginePlan>, MemoryMap)> {
    let placement = match &l.placement {
        PlacementSpec::Name(n) => Placement::parse(n)?,
        PlacementSpec::List(v) => Placement::Explicit(v.clone()),
    };
    let channels = placement.channels(l.partitions, l.channels)?;
    let partitioned = tables
        .iter()
        .filter(|t| t.share == Share::Partitioned)
        .count();
    if l.partition_rows.is_some() && partitioned != 1 {
        return Err(Error::input(
            "layout.partition_rows: only a job with one partitioned table can give explicit sizes",
        ));
    }
    let mut ranges = Vec::new();
    // Bytes of one row-major record: the kernel's own form, else the columns' byte forms.
    let record_bytes = |t: &InputTable| -> Option<u64> {
        kernel
            .record_form(&t.name)
            .filter(|_| row_major)
            .map(|f| f.record_bytes(word_bytes))
    };
    for t in tables {
        let bits: Vec<u32> = match record_bytes(t) {
            Some(b) => vec![u32::try_from(b * 8).unwrap_or(u32::MAX)],
            None => t.schema.iter().map(|(_, ty)| ty.bits()).collect(),
        };
        let g = layout::granule(l.word_bits, &bits, row_major);
        let rows = t.source.rows();
        ranges.push(match (t.share, &l.partition_rows) {
            (Share::Replicated, _) => vec![0..rows; l.partitions as usize],
            (Share::Partitioned, None) => layout::split_rows(rows, l.partitions, g)?,
            (Share::Partitioned, Some(counts)) => explicit_split(counts, l.partitions, rows, g)?,
        });
    }
    let channel_bytes = l.channel_mib.checked_mul(1 << 20).ok_or_else(|| {
        Error::input(format!(
            "layout.channel_mib = {} is too large",
            l.channel_mib
        ))
    })?;
    let mut map =
        MemoryMap::new(word_bytes, l.channels, channel_bytes).map_err(|e| e.context("layout"))?;
    let image_bytes = |t: &InputTable, col: &str, n: u64| -> u64 {
        if row_major {
            let rec: u64 = record_bytes(t).unwrap_or_else(|| {
                t.schema
                    .iter()
                    .map(|(_, ty)| u64::from(ty.bits() / 8))
                    .sum()
            });
            n * rec
        } else {
            let ty = t.schema.iter().find(|(c, _)| c == col).expect("a column").1;
            table::byte_len(ty, n)
        }
    };
    let image_columns = |t: &InputTable| -> Vec<String> {
        if row_major {
            vec![ROWS.into()]
        } else {
            t.schema.iter().map(|(n, _)| n.clone()).collect()
        }
    };
    for (p, &ch) in channels.iter().enumerate() {
        for (t, r) in tables.iter().zip(&ranges) {
            if t.share == Share::Partitioned {
                for col in image_columns(t) {
                    let id = RegionId::Input {
                        table: t.name.clone(),
                        part: p as u32,
                        column: col.clone(),
                    };
                    map.place(id, ch, image_bytes(t, &col, r[p].end - r[p].start))?;
                }
            }
        }
    }
    let mut used = channels.clone();
    used.sort_unstable();
    used.dedup();
    for &ch in &used {
        for t in tables.iter().filter(|t| t.share == Share::Replicated) {
            for col in image_columns(t) {
                let id = RegionId::Replica {
                    table: t.name.clone(),
                    channel: ch,
                    column: col.clone(),
                };
                map.place(id, ch, image_bytes(t, &col, t.source.rows()))?;
            }
        }
    }
    let mut engines = Vec::new();
    for (p, &channel) in channels.iter().enumerate() {
        let rows: Vec<_> = ranges.iter().map(|r| r[p].clone()).collect();
        let whole: Vec<Option<&Table>> = tables.iter().map(|t| t.whole.as_ref()).collect();
        let regions = kernel.regions(p as u32, &rows, &whole);
        for need in &regions {
            let id = RegionId::Output {
                kernel: kernel.name().into(),
                engine: p as u32,
                name: need.name.clone(),
            };
            map.place(id, channel, need.sizing.bytes())?;
        }
        engines.push(EnginePlan {
            channel,
            rows,
            regions,
        });
    }
    Ok((engines, map))
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

/// The table read from the job's CSV or column files, if it names any.
fn load_files(input: &InputSpec, table: &str, job_dir: &Path) -> Result<Option<Table>> {
    if let Some(csv) = &input.csv {
        let path = job_dir.join(csv);
        let given: Option<Vec<(String, ElemType)>> = (!input.columns.is_empty()).then(|| {
            input
                .columns
                .iter()
                .map(|c| (c.name.clone(), c.ty))
                .collect()
        });
        return table::read_csv(&path, table, given.as_deref()).map(Some);
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
    Table::new(table, cols).map(Some).map_err(Error::input)
}

/// The generator the job describes (telemetry, or one generator per column); `ranges`
/// are the kernel's hints for `select` columns that leave their bounds out.
fn build_gen(
    input: &mut InputSpec,
    table: &str,
    schema: &[(String, ElemType)],
    ranges: &[(String, i128, i128)],
) -> Result<TableGen> {
    let table = table.to_string();
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
        Some("samples") => {
            let (gen, q) = samples_gen(input)?;
            return Ok(TableGen {
                table,
                rows,
                seed: input.seed,
                shape: Shape::Samples { gen, q },
            });
        }
        None | Some("columns") => {}
        Some(g) => {
            return Err(Error::input(format!(
                "input.generator: unknown generator `{g}` (expected columns, telemetry or samples)"
            )))
        }
    }
    if input.columns.is_empty() {
        return Err(Error::input(
            "input: give columns (generated or from files) or a csv file",
        ));
    }
    debug_assert_eq!(schema.len(), input.columns.len());
    let mut gens = Vec::new();
    for c in input.columns.iter_mut() {
        let range = ranges.iter().find(|r| r.0 == c.name);
        let g = column_gen(c, range.map(|r| (r.1, r.2)))?;
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
