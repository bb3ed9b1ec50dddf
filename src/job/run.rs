//! Running a prepared job, engine by engine:
//!
//! ```text
//!   for each engine e:  rows of its partitions ─► input images (+ channel images, arrays)
//!                                            └─► kernel.run(e) ─► golden images + arrays
//!                                                              └─► ledger (merged)
//!   then: replicated tables' images, ledger, memory map, manifest, timing
//! ```
//!
//! Only one engine's partitions are held at a time (replicated tables are held whole).
//! Nothing here knows a kernel: files follow what the kernel declared and returned.

use std::time::Instant;

use crate::error::{Error, Result};
use crate::job::files::RunFiles;
use crate::job::outdir::OutDir;
use crate::job::prepare::{InputTable, Prepared};
use crate::kernels::seam::{Arrays, EngineCtx, EngineRun, EngineTable, Golden, Share};
use crate::ledger::{Direction, Ledger, Region};
use crate::manifest::{
    FieldEntry, FileEntry, Manifest, Role, MANIFEST_FILE, MANIFEST_FORMAT_VERSION,
};
use crate::memmap::MapGolden;
use crate::table::{self, Table};

/// What one engine did.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PartSummary {
    /// Engine (= partition) index.
    pub partition: u32,
    /// Channel.
    pub channel: u32,
    /// Rows it read from its partitioned inputs.
    pub rows: u64,
    /// Result rows (matches, pairs).
    pub records: u64,
    /// Seconds in the kernel.
    pub kernel_s: f64,
}

/// What a run produced, for the terminal summary and `timing.json`.
#[derive(Debug, Clone)]
pub struct RunSummary {
    /// Files written (including manifest and timing).
    pub files: usize,
    /// Input bytes the kernel read from device memory.
    pub input_bytes: u64,
    /// Requested selectivity of each generated `select` column, as (table.column, fraction).
    pub requested: Vec<(String, f64)>,
    /// The kernel's summary lines.
    pub kernel_lines: Vec<String>,
    /// Merged ledger.
    pub ledger: Ledger,
    /// Per engine.
    pub parts: Vec<PartSummary>,
    /// Seconds generating or slicing input rows.
    pub gen_s: f64,
    /// Seconds in the kernel.
    pub kernel_s: f64,
    /// Seconds writing files.
    pub write_s: f64,
    /// Instruction set or variant the kernel used.
    pub isa: &'static str,
}

/// Seconds spent per activity.
#[derive(Default)]
struct Clock {
    gen_s: f64,
    kernel_s: f64,
    write_s: f64,
}

fn timed<T>(acc: &mut f64, f: impl FnOnce() -> T) -> T {
    let t = Instant::now();
    let r = f();
    *acc += t.elapsed().as_secs_f64();
    r
}

/// Runs `prep` into `dir` under `prefix` (`""` or `seed-N/`).
pub fn run_into(
    prep: &Prepared,
    dir: &OutDir,
    prefix: &str,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<RunSummary> {
    let mut w = RunFiles::new(dir, prefix, prep.spec.layout.word_bits, prep.map.channels());
    let mut clock = Clock::default();
    let mut ledger = Ledger::new();
    let mut parts = Vec::new();
    let mut goldens = Vec::new();
    let mut notes = Vec::new();
    for e in 0..prep.engines.len() {
        let rows = timed(&mut clock.gen_s, || partition_rows(prep, e));
        timed(&mut clock.write_s, || {
            write_partitions(&mut w, prep, e, &rows)
        })?;
        let mut kernel_s = 0.0;
        let run = timed(&mut kernel_s, || run_engine(prep, e, &rows))?;
        clock.kernel_s += kernel_s;
        parts.push(PartSummary {
            partition: e as u32,
            channel: prep.engines[e].channel,
            rows: run.rows_in,
            records: run.rows_out,
            kernel_s,
        });
        ledger.merge(&run.ledger);
        notes.extend(run.notes.iter().cloned());
        let wb = prep.map.word_bytes();
        goldens.push(
            run.outputs
                .iter()
                .map(|o| MapGolden {
                    name: o.name.clone(),
                    records: o.records,
                    words: (o.bytes.len() as u64).div_ceil(wb),
                })
                .collect(),
        );
        timed(&mut clock.write_s, || {
            write_goldens(&mut w, prep, e, &run.outputs)
        })?;
        progress(e + 1, prep.engines.len());
    }
    let listed = timed(&mut clock.write_s, || {
        write_replicas(&mut w, prep)?;
        let single = (prep.tables.len() == 1).then(|| prep.tables[0].name.as_str());
        w.finish_channels(single)?;
        write_records(&mut w, prep, &ledger, &goldens)
    })?;
    // The manifest and timing.json are not listed in the manifest.
    let mut summary = summarize(prep, listed + 2, ledger, parts, &clock);
    summary.kernel_lines.extend(notes);
    w.unlisted("timing.json", timing_json(&summary).as_bytes())?;
    Ok(summary)
}

/// Runs every engine of `prep` without writing anything and returns the merged ledger
/// (for what-if sweeps: each partition is generated once).
pub fn ledger_only(prep: &Prepared) -> Result<Ledger> {
    let mut ledger = Ledger::new();
    for e in 0..prep.engines.len() {
        let rows: Vec<Option<Table>> = partition_rows(prep, e);
        ledger.merge(&run_engine(prep, e, &rows)?.ledger);
    }
    Ok(ledger)
}

/// Engine `e`'s partitions of the partitioned tables (`None` for replicated ones).
fn partition_rows(prep: &Prepared, e: usize) -> Vec<Option<Table>> {
    prep.tables
        .iter()
        .zip(&prep.engines[e].rows)
        .map(|(t, r)| (t.share == Share::Partitioned).then(|| t.source.rows_of(r.clone())))
        .collect()
}

/// Engine `e`'s kernel run on its partitions (`rows`, by input) and replicated tables.
fn run_engine(prep: &Prepared, e: usize, rows: &[Option<Table>]) -> Result<EngineRun> {
    let plan = &prep.engines[e];
    let tables = prep
        .tables
        .iter()
        .zip(rows)
        .zip(&plan.rows)
        .map(|((t, part), r)| {
            let bases = |col: &str| prep.region(&prep.input_id(t, e, col)).base;
            let rows = part
                .as_ref()
                .or(t.whole.as_ref())
                .expect("rows or whole table");
            EngineTable {
                rows,
                row_start: r.start,
                channel: prep
                    .region(&prep.input_id(t, e, &prep.image_columns(t)[0]))
                    .channel,
                column_bases: if prep.row_major {
                    Vec::new()
                } else {
                    t.schema.iter().map(|(c, _)| bases(c)).collect()
                },
                row_base: prep.row_major.then(|| bases(crate::job::prepare::ROWS)),
            }
        })
        .collect();
    let ctx = EngineCtx {
        engine: e as u32,
        engines: prep.engines.len() as u32,
        channel: plan.channel,
        word_bytes: prep.map.word_bytes(),
        tables,
        region_bases: (0..plan.regions.len())
            .map(|r| prep.region(&prep.output_id(e, r)).base)
            .collect(),
    };
    prep.kernel
        .run(&ctx)
        .map_err(|m| Error::input(format!("engine {e}: {m}")))
}

/// The device bytes of each image of `part` of `t` (one per column, or one of row-major
/// records, in the kernel's record form when it has one).
fn image_bytes(prep: &Prepared, t: &InputTable, part: &Table) -> Result<Vec<Vec<u8>>> {
    if let Some(form) = prep.kernel.record_form(&t.name).filter(|_| prep.row_major) {
        let bytes = form
            .encode(part, prep.map.word_bytes())
            .map_err(|m| Error::input(format!("table `{}`: {m}", t.name)))?;
        return Ok(vec![bytes]);
    }
    Ok(if prep.row_major {
        let mut bytes = Vec::new();
        for r in 0..part.rows() {
            for c in &part.columns {
                table::column_bytes(c, r..r + 1, &mut bytes);
            }
        }
        vec![bytes]
    } else {
        part.columns
            .iter()
            .map(|c| {
                let mut bytes = Vec::new();
                table::column_bytes(c, 0..c.len(), &mut bytes);
                bytes
            })
            .collect()
    })
}

/// The element label of column `c` of `t` (`i16:Q3.12` when a format was given).
fn elem_name(t: &InputTable, c: usize) -> String {
    match t.q.get(c).copied().flatten() {
        Some(q) => format!("{}:{q}", t.schema[c].1),
        None => t.schema[c].1.to_string(),
    }
}

/// Writes engine `e`'s partition images, their channel segments and typed arrays.
fn write_partitions(
    w: &mut RunFiles,
    prep: &Prepared,
    e: usize,
    rows: &[Option<Table>],
) -> Result<()> {
    let plan = &prep.engines[e];
    for ((t, part), r) in prep.tables.iter().zip(rows).zip(&plan.rows) {
        let Some(part) = part else { continue };
        let proto = FileEntry {
            role: Some(Role::Input),
            table: Some(t.name.clone()),
            partition: Some(e as u32),
            channel: Some(plan.channel),
            rows: Some([r.start, r.end]),
            ..FileEntry::default()
        };
        write_table_images(w, prep, t, e, part, &proto)?;
        if prep.spec.output.typed_npy {
            write_typed_columns(w, t, part, &format!("{}.p{e}", t.name), &proto)?;
        }
    }
    Ok(())
}

/// The manifest entry of image `ci` (`col`) of table `t`.
fn image_entry(
    prep: &Prepared,
    t: &InputTable,
    ci: usize,
    col: &str,
    proto: &FileEntry,
) -> FileEntry {
    FileEntry {
        column: Some(col.to_string()),
        elem: Some(if prep.row_major {
            "record".into()
        } else {
            elem_name(t, ci)
        }),
        ..proto.clone()
    }
}

/// Writes the images of `part` (engine `e`'s partition of `t`) and their channel segments.
fn write_table_images(
    w: &mut RunFiles,
    prep: &Prepared,
    t: &InputTable,
    e: usize,
    part: &Table,
    proto: &FileEntry,
) -> Result<()> {
    let cols = prep.image_columns(t);
    for (ci, (col, bytes)) in cols.iter().zip(image_bytes(prep, t, part)?).enumerate() {
        let reg = prep.region(&prep.input_id(t, e, col));
        let entry = FileEntry {
            base: Some(reg.base),
            ..image_entry(prep, t, ci, col, proto)
        };
        let segment = prep.spec.output.channel_images.then_some(reg);
        w.images(
            &format!("input/{}", reg.id),
            &prep.formats,
            &bytes,
            &entry,
            segment,
        )?;
    }
    Ok(())
}

/// Writes each column of `part` as a typed array `arrays/{stem}.{column}.npy`.
fn write_typed_columns(
    w: &mut RunFiles,
    t: &InputTable,
    part: &Table,
    stem: &str,
    proto: &FileEntry,
) -> Result<()> {
    for (ci, c) in part.columns.iter().enumerate() {
        let mut data = Vec::new();
        if c.ty.is_sub_byte() {
            if let table::ColumnData::U8(v) = &c.data {
                data.extend_from_slice(v);
            }
        } else {
            table::column_bytes(c, 0..c.len(), &mut data);
        }
        let entry = FileEntry {
            column: Some(c.name.clone()),
            elem: Some(elem_name(t, ci)),
            ..proto.clone()
        };
        let name = format!("arrays/{stem}.{}.npy", c.name);
        w.typed(&name, c.ty.npy_descr(), &[c.len() as u64], &data, &entry)?;
    }
    Ok(())
}

/// Writes the replicated tables: one set of images `input/{table}.{column}.*` (the same
/// bytes on every channel), one channel-image segment per copy, and their typed arrays.
fn write_replicas(w: &mut RunFiles, prep: &Prepared) -> Result<()> {
    for t in prep.tables.iter().filter(|t| t.share == Share::Replicated) {
        let whole = t.whole.as_ref().expect("replicated tables are held whole");
        let proto = FileEntry {
            role: Some(Role::Input),
            table: Some(t.name.clone()),
            rows: Some([0, whole.rows() as u64]),
            ..FileEntry::default()
        };
        let cols = prep.image_columns(t);
        let images = image_bytes(prep, t, whole)?;
        // The engine reading each channel's copy; the first copy is written together with
        // the images, the others after them.
        let readers: Vec<usize> = if prep.spec.output.channel_images {
            prep.engine_channels()
                .into_iter()
                .map(|ch| {
                    prep.engines
                        .iter()
                        .position(|p| p.channel == ch)
                        .expect("an engine")
                })
                .collect()
        } else {
            Vec::new()
        };
        let copy = |e: usize, col: &str| prep.region(&prep.input_id(t, e, col));
        for (ci, (col, bytes)) in cols.iter().zip(&images).enumerate() {
            let entry = image_entry(prep, t, ci, col, &proto);
            w.images(
                &format!("input/{}.{col}", t.name),
                &prep.formats,
                bytes,
                &entry,
                readers.first().map(|&e| copy(e, col)),
            )?;
        }
        for &e in readers.iter().skip(1) {
            for (col, bytes) in cols.iter().zip(&images) {
                w.channel_segment(copy(e, col), bytes)?;
            }
        }
        if prep.spec.output.typed_npy {
            write_typed_columns(w, t, whole, &t.name, &proto)?;
        }
    }
    Ok(())
}

/// Writes engine `e`'s golden outputs: every image, then every typed array.
fn write_goldens(w: &mut RunFiles, prep: &Prepared, e: usize, outputs: &[Golden]) -> Result<()> {
    let plan = &prep.engines[e];
    let first = prep
        .tables
        .iter()
        .position(|t| t.share == Share::Partitioned);
    let gold = FileEntry {
        role: Some(Role::Golden),
        kernel: Some(prep.kernel.name().into()),
        table: first.map(|i| prep.tables[i].name.clone()),
        partition: Some(e as u32),
        channel: Some(plan.channel),
        rows: first.map(|i| [plan.rows[i].start, plan.rows[i].end]),
        ..FileEntry::default()
    };
    let entry = |o: &Golden| FileEntry {
        column: Some(o.name.clone()),
        elem: Some(o.elem.clone()),
        records: Some(o.records),
        record_bytes: Some(o.record_bytes),
        fields: (o.fields.len() > 1).then(|| {
            o.fields
                .iter()
                .map(|f| FieldEntry {
                    name: f.name.clone(),
                    elem: f.ty.name().into(),
                    bits: f.ty.bits(),
                })
                .collect()
        }),
        ..gold.clone()
    };
    let stem = |o: &Golden| format!("{}.p{e}.{}", prep.kernel.name(), o.name);
    for o in outputs {
        let proto = FileEntry {
            base: o.region.map(|r| prep.region(&prep.output_id(e, r)).base),
            ..entry(o)
        };
        w.images(
            &format!("golden/{}", stem(o)),
            &prep.formats,
            &o.bytes,
            &proto,
            None,
        )?;
    }
    if !prep.spec.output.typed_npy {
        return Ok(());
    }
    for o in outputs {
        let name = stem(o);
        match &o.arrays {
            Arrays::None => {}
            Arrays::Whole { descr, len } => {
                w.typed(
                    &format!("arrays/{name}.npy"),
                    descr,
                    &[*len],
                    &o.bytes,
                    &entry(o),
                )?;
            }
            Arrays::PerField => write_field_arrays(w, o, &name, &entry(o))?,
        }
    }
    Ok(())
}

/// One typed array per record field, cut from the packed records.
fn write_field_arrays(w: &mut RunFiles, o: &Golden, name: &str, proto: &FileEntry) -> Result<()> {
    let widths: Vec<usize> = o.fields.iter().map(|f| f.ty.bits() as usize / 8).collect();
    let rec: usize = widths.iter().sum();
    let mut off = 0;
    for (f, &wd) in o.fields.iter().zip(&widths) {
        let data: Vec<u8> = o
            .bytes
            .chunks_exact(rec.max(1))
            .flat_map(|r| r[off..off + wd].iter().copied())
            .collect();
        off += wd;
        let entry = FileEntry {
            column: Some(format!("{}.{}", o.name, f.name)),
            elem: Some(f.ty.to_string()),
            ..proto.clone()
        };
        let path = format!("arrays/{name}.{}.npy", f.name);
        w.typed(&path, f.ty.npy_descr(), &[o.records], &data, &entry)?;
    }
    Ok(())
}

/// Writes the ledger, the memory map and the manifest; returns the files it lists.
fn write_records(
    w: &mut RunFiles,
    prep: &Prepared,
    ledger: &Ledger,
    goldens: &[Vec<MapGolden>],
) -> Result<usize> {
    let word_bits = prep.spec.layout.word_bits;
    let json = serde_json::to_string_pretty(&ledger.to_json(word_bits)).expect("json") + "\n";
    w.plain("ledger.json", Role::Ledger, "json", json.as_bytes())?;
    w.plain(
        "ledger.csv",
        Role::Ledger,
        "csv",
        ledger.to_csv().as_bytes(),
    )?;
    let map = crate::memmap::MapInfo { prep, goldens };
    w.plain("memory_map.vh", Role::Map, "vh", map.verilog().as_bytes())?;
    w.plain("memory_map.json", Role::Map, "json", map.json().as_bytes())?;
    let manifest = Manifest {
        format_version: MANIFEST_FORMAT_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").into(),
        job: serde_json::to_value(&prep.spec).expect("job serializes"),
        word_bits,
        files: std::mem::take(&mut w.files),
    };
    w.unlisted(MANIFEST_FILE, manifest.to_json().as_bytes())?;
    Ok(manifest.files.len())
}

fn summarize(
    prep: &Prepared,
    files: usize,
    ledger: Ledger,
    parts: Vec<PartSummary>,
    clock: &Clock,
) -> RunSummary {
    let runs: Vec<(u64, u64)> = parts.iter().map(|p| (p.rows, p.records)).collect();
    RunSummary {
        files,
        input_bytes: ledger
            .sum(|k| k.direction == Direction::Read && k.region == Region::Device)
            .bytes,
        requested: requested_selectivity(prep),
        kernel_lines: prep.kernel.summary(&runs),
        ledger,
        parts,
        gen_s: clock.gen_s,
        kernel_s: clock.kernel_s,
        write_s: clock.write_s,
        isa: prep.kernel.host_variant(),
    }
}

fn timing_json(s: &RunSummary) -> String {
    let gbps = if s.kernel_s > 0.0 {
        s.input_bytes as f64 / s.kernel_s / 1e9
    } else {
        0.0
    };
    let v = serde_json::json!({
        "threads": rayon::current_num_threads(),
        "isa": s.isa,
        "generate_s": s.gen_s,
        "kernel_s": s.kernel_s,
        "write_s": s.write_s,
        "kernel_gbps": gbps,
        "partitions": s.parts,
    });
    serde_json::to_string_pretty(&v).expect("json") + "\n"
}

fn requested_selectivity(prep: &Prepared) -> Vec<(String, f64)> {
    let mut out = Vec::new();
    for (name, t) in prep.spec.table_specs().unwrap_or_default() {
        for c in &t.columns {
            if let (Some("select"), Some(s)) = (c.dist.as_deref(), c.selectivity) {
                out.push((format!("{name}.{}", c.name), s));
            }
        }
    }
    out
}
