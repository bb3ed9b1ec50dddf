//! Running a prepared job: partition by partition, generate or slice the rows, write the
//! input images, run the kernel, write the golden outputs; then the ledger, memory map,
//! manifest and timing. Only one partition's rows are held at a time.

use std::io::Write;
use std::time::Instant;

use crate::error::{Error, Result};
use crate::image::{self, ImageFormat, Segment};
use crate::job::outdir::{OutDir, OutFile};
use crate::job::prepare::{input_region, output_region, Prepared, SCAN};
use crate::kernels::scan::{self, EngineIo, Isa, ScanOutput};
use crate::layout::Placed;
use crate::ledger::Ledger;
use crate::manifest::{FileEntry, Manifest, Role, MANIFEST_FILE, MANIFEST_FORMAT_VERSION};
use crate::table::{self, Table};

/// What one partition produced.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PartSummary {
    /// Partition index.
    pub partition: u32,
    /// Channel.
    pub channel: u32,
    /// Rows in the partition.
    pub rows: u64,
    /// Matching rows.
    pub matches: u64,
    /// Seconds in the kernel.
    pub kernel_s: f64,
}

/// What a run produced, for the terminal summary and `timing.json`.
#[derive(Debug, Clone)]
pub struct RunSummary {
    /// Files written (including manifest and timing).
    pub files: usize,
    /// Input rows.
    pub rows: u64,
    /// Input bytes the kernel read from device memory.
    pub input_bytes: u64,
    /// Matching rows.
    pub matches: u64,
    /// Requested selectivity of the generator's `select` column, if any.
    pub requested_selectivity: Option<f64>,
    /// Merged ledger.
    pub ledger: Ledger,
    /// Per partition.
    pub parts: Vec<PartSummary>,
    /// Seconds generating or slicing input rows.
    pub gen_s: f64,
    /// Seconds in the kernel.
    pub kernel_s: f64,
    /// Seconds writing files.
    pub write_s: f64,
    /// Instruction set the kernel used.
    pub isa: &'static str,
}

struct Writer<'a> {
    dir: &'a OutDir,
    prefix: &'a str,
    word_bits: u32,
    word_bytes: usize,
    files: Vec<FileEntry>,
}

impl Writer<'_> {
    fn rel(&self, name: &str) -> String {
        format!("{}{name}", self.prefix)
    }

    fn io(&self, rel: &str) -> impl Fn(std::io::Error) -> Error + '_ {
        let p = self.dir.tmp_path(rel);
        move |e| Error::io(&p, e)
    }

    /// Writes `bytes` as a memory image in every format; `proto` carries the metadata.
    fn images(
        &mut self,
        stem: &str,
        formats: &[ImageFormat],
        bytes: &[u8],
        proto: &FileEntry,
    ) -> Result<()> {
        for &f in formats {
            let rel = self.rel(&format!("{stem}.{}", f.ext()));
            let mut out = self.dir.file(&rel)?;
            let words = image::write_image(&mut out, f, self.word_bytes, bytes)
                .map_err(|e| Error::input(format!("{rel}: {e}")))?;
            let (fbytes, sha) = out.finish().map_err(self.io(&rel))?;
            self.files.push(FileEntry {
                path: rel,
                format: f.ext().into(),
                word_bits: Some(self.word_bits),
                words: Some(words),
                payload_bytes: Some(bytes.len() as u64),
                padding_bytes: Some(words * self.word_bytes as u64 - bytes.len() as u64),
                bytes: fbytes,
                sha256: sha,
                ..proto.clone()
            });
        }
        Ok(())
    }

    /// Writes a typed `.npy` array.
    fn typed(
        &mut self,
        name: &str,
        descr: &str,
        shape: &[u64],
        data: &[u8],
        proto: &FileEntry,
    ) -> Result<()> {
        let rel = self.rel(name);
        let mut out = self.dir.file(&rel)?;
        crate::npy::write_npy(&mut out, descr, shape, data).map_err(self.io(&rel))?;
        let (fbytes, sha) = out.finish().map_err(self.io(&rel))?;
        self.files.push(FileEntry {
            path: rel,
            format: "npy-typed".into(),
            payload_bytes: Some(data.len() as u64),
            bytes: fbytes,
            sha256: sha,
            ..proto.clone()
        });
        Ok(())
    }

    fn plain(&mut self, name: &str, role: Role, format: &str, text: &[u8]) -> Result<()> {
        let rel = self.rel(name);
        let (bytes, sha) = self.dir.write_all(&rel, text)?;
        self.files.push(FileEntry {
            path: rel,
            role: Some(role),
            format: format.into(),
            bytes,
            sha256: sha,
            ..FileEntry::default()
        });
        Ok(())
    }
}

/// One open per-channel hex image.
struct ChannelImage {
    rel: String,
    out: OutFile,
    end_word: u64,
}

/// Runs `prep` into `dir` under `prefix` (`""` or `seed-N/`).
pub fn run_into(
    prep: &Prepared,
    dir: &OutDir,
    prefix: &str,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<RunSummary> {
    let spec = &prep.spec;
    let word_bits = spec.layout.word_bits;
    let word_bytes = prep.map.word_bytes();
    let table_name = &spec.input.table;
    let isa = Isa::detect();
    let mut w = Writer {
        dir,
        prefix,
        word_bits,
        word_bytes: word_bytes as usize,
        files: Vec::new(),
    };
    let mut channel_images: Vec<Option<ChannelImage>> =
        (0..prep.map.channels()).map(|_| None).collect();
    let mut ledger = Ledger::new();
    let mut parts = Vec::new();
    let (mut gen_s, mut kernel_s, mut write_s) = (0.0, 0.0, 0.0);
    let types: Vec<_> = prep.schema.iter().map(|(_, t)| *t).collect();
    let region = |name: &str| -> &Placed {
        prep.map
            .get(name)
            .expect("every region was placed in prepare")
    };
    let elem_name = |c: usize| match prep.q.get(c).copied().flatten() {
        Some(q) => format!("{}:{q}", types[c]),
        None => types[c].to_string(),
    };
    for (p, plan) in prep.parts.iter().enumerate() {
        let t0 = Instant::now();
        let part: Table = prep.source.rows_of(plan.rows.clone());
        gen_s += t0.elapsed().as_secs_f64();

        // Inputs.
        let t1 = Instant::now();
        let base_entry = FileEntry {
            role: Some(Role::Input),
            table: Some(table_name.clone()),
            partition: Some(p as u32),
            channel: Some(plan.channel),
            rows: Some([plan.rows.start, plan.rows.end]),
            ..FileEntry::default()
        };
        let mut input_images: Vec<(String, Vec<u8>)> = Vec::new();
        if prep.row_major {
            let mut bytes = Vec::new();
            for r in 0..part.rows() {
                for c in &part.columns {
                    table::column_bytes(c, r..r + 1, &mut bytes);
                }
            }
            input_images.push(("rows".into(), bytes));
        } else {
            for c in &part.columns {
                let mut bytes = Vec::new();
                table::column_bytes(c, 0..c.len(), &mut bytes);
                input_images.push((c.name.clone(), bytes));
            }
        }
        for (ci, (col, bytes)) in input_images.iter().enumerate() {
            let name = input_region(table_name, p, col);
            let reg = region(&name);
            let proto = FileEntry {
                column: Some(col.clone()),
                base: Some(reg.base),
                elem: Some(if prep.row_major {
                    "record".into()
                } else {
                    elem_name(ci)
                }),
                ..base_entry.clone()
            };
            w.images(&format!("input/{name}"), &prep.formats, bytes, &proto)?;
            if spec.output.channel_images {
                let ch = plan.channel as usize;
                if channel_images[ch].is_none() {
                    let rel = w.rel(&format!("input/ch{ch}.hex"));
                    channel_images[ch] = Some(ChannelImage {
                        out: dir.file(&rel)?,
                        rel,
                        end_word: 0,
                    });
                }
                let img = channel_images[ch].as_mut().expect("opened above");
                let seg = Segment {
                    word_addr: reg.word_addr(word_bytes),
                    bytes,
                    label: &name,
                };
                image::write_hex_segments(&mut img.out, word_bytes as usize, &[seg])
                    .map_err(|e| Error::input(format!("{}: {e}", img.rel)))?;
                img.end_word = img.end_word.max(reg.word_addr(word_bytes) + reg.words);
            }
        }
        if spec.output.typed_npy {
            for (ci, c) in part.columns.iter().enumerate() {
                let mut data = Vec::new();
                if c.ty.is_sub_byte() {
                    if let table::ColumnData::U8(v) = &c.data {
                        data.extend_from_slice(v);
                    }
                } else {
                    table::column_bytes(c, 0..c.len(), &mut data);
                }
                let proto = FileEntry {
                    column: Some(c.name.clone()),
                    elem: Some(elem_name(ci)),
                    ..base_entry.clone()
                };
                w.typed(
                    &format!("arrays/{}.npy", input_region(table_name, p, &c.name)),
                    c.ty.npy_descr(),
                    &[c.len() as u64],
                    &data,
                    &proto,
                )?;
            }
        }
        write_s += t1.elapsed().as_secs_f64();

        // Kernel.
        let out_reg = region(&output_region(SCAN, p, "out"));
        let count_reg = region(&output_region(SCAN, p, "count"));
        let column_bases = if prep.row_major {
            Vec::new()
        } else {
            part.columns
                .iter()
                .map(|c| region(&input_region(table_name, p, &c.name)).base)
                .collect()
        };
        let io = EngineIo {
            engine: p as u32,
            channel: plan.channel,
            word_bytes,
            column_bases,
            row_base: prep
                .row_major
                .then(|| region(&input_region(table_name, p, "rows")).base),
            out_base: out_reg.base,
            count_base: count_reg.base,
        };
        let t2 = Instant::now();
        let res = scan::scan_partition(isa, &part, plan.rows.start, &prep.scan, &io);
        let ks = t2.elapsed().as_secs_f64();
        kernel_s += ks;
        ledger.merge(&res.ledger);

        // Golden outputs.
        let t3 = Instant::now();
        let (elem, rec_bytes, records) = match &prep.scan.output {
            ScanOutput::RowIds => (
                if prep.scan.wide_ids { "u64" } else { "u32" }.to_string(),
                prep.scan.record_bytes(&types),
                res.count,
            ),
            ScanOutput::Bitmap => ("bits".to_string(), 0, part.rows() as u64),
            ScanOutput::Project(_) => (
                "record".to_string(),
                prep.scan.record_bytes(&types),
                res.count,
            ),
        };
        let gold = FileEntry {
            role: Some(Role::Golden),
            kernel: Some(SCAN.into()),
            table: Some(table_name.clone()),
            partition: Some(p as u32),
            channel: Some(plan.channel),
            rows: Some([plan.rows.start, plan.rows.end]),
            ..FileEntry::default()
        };
        let out_name = output_region(SCAN, p, "out");
        w.images(
            &format!("golden/{out_name}"),
            &prep.formats,
            &res.out,
            &FileEntry {
                column: Some("out".into()),
                base: Some(out_reg.base),
                elem: Some(elem.clone()),
                records: Some(records),
                record_bytes: Some(rec_bytes),
                ..gold.clone()
            },
        )?;
        let count_name = output_region(SCAN, p, "count");
        w.images(
            &format!("golden/{count_name}"),
            &prep.formats,
            &res.count.to_le_bytes(),
            &FileEntry {
                column: Some("count".into()),
                base: Some(count_reg.base),
                elem: Some("u64".into()),
                records: Some(1),
                record_bytes: Some(8),
                ..gold.clone()
            },
        )?;
        if spec.output.typed_npy {
            let proto = FileEntry {
                column: Some("out".into()),
                elem: Some(elem.clone()),
                records: Some(records),
                record_bytes: Some(rec_bytes),
                ..gold.clone()
            };
            match &prep.scan.output {
                ScanOutput::RowIds => {
                    let d = if prep.scan.wide_ids { "<u8" } else { "<u4" };
                    w.typed(
                        &format!("arrays/{out_name}.npy"),
                        d,
                        &[res.count],
                        &res.out,
                        &proto,
                    )?;
                }
                ScanOutput::Bitmap => {
                    w.typed(
                        &format!("arrays/{out_name}.npy"),
                        "|u1",
                        &[res.out.len() as u64],
                        &res.out,
                        &proto,
                    )?;
                }
                ScanOutput::Project(cols) => {
                    // One typed array per projected column, cut from the records.
                    let widths: Vec<usize> =
                        cols.iter().map(|&c| types[c].bits() as usize / 8).collect();
                    let rec: usize = widths.iter().sum();
                    let mut off = 0;
                    for (&c, &wd) in cols.iter().zip(&widths) {
                        let data: Vec<u8> = res
                            .out
                            .chunks_exact(rec.max(1))
                            .flat_map(|r| r[off..off + wd].to_vec())
                            .collect();
                        off += wd;
                        let name = format!("arrays/{out_name}.{}.npy", prep.schema[c].0);
                        w.typed(
                            &name,
                            types[c].npy_descr(),
                            &[res.count],
                            &data,
                            &FileEntry {
                                column: Some(format!("out.{}", prep.schema[c].0)),
                                elem: Some(types[c].to_string()),
                                ..proto.clone()
                            },
                        )?;
                    }
                }
            }
        }
        write_s += t3.elapsed().as_secs_f64();
        parts.push(PartSummary {
            partition: p as u32,
            channel: plan.channel,
            rows: part.rows() as u64,
            matches: res.count,
            kernel_s: ks,
        });
        progress(p + 1, prep.parts.len());
    }

    let t4 = Instant::now();
    for (ch, img) in channel_images.into_iter().enumerate() {
        if let Some(img) = img {
            let (bytes, sha) = img.out.finish().map_err(w.io(&img.rel))?;
            w.files.push(FileEntry {
                path: img.rel,
                role: Some(Role::Input),
                format: "hex".into(),
                table: Some(table_name.clone()),
                channel: Some(ch as u32),
                base: Some(0),
                word_bits: Some(word_bits),
                words: Some(img.end_word),
                bytes,
                sha256: sha,
                ..FileEntry::default()
            });
        }
    }
    let ledger_json =
        serde_json::to_string_pretty(&ledger.to_json(word_bits)).expect("json") + "\n";
    w.plain("ledger.json", Role::Ledger, "json", ledger_json.as_bytes())?;
    w.plain(
        "ledger.csv",
        Role::Ledger,
        "csv",
        ledger.to_csv().as_bytes(),
    )?;
    let map = crate::memmap::MapInfo { prep };
    w.plain("memory_map.vh", Role::Map, "vh", map.verilog().as_bytes())?;
    w.plain("memory_map.json", Role::Map, "json", map.json().as_bytes())?;
    let manifest = Manifest {
        format_version: MANIFEST_FORMAT_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").into(),
        job: serde_json::to_value(&prep.spec).expect("job serializes"),
        word_bits,
        files: std::mem::take(&mut w.files),
    };
    let files = manifest.files.len() + 2;
    let rel = w.rel(MANIFEST_FILE);
    dir.write_all(&rel, manifest.to_json().as_bytes())?;
    write_s += t4.elapsed().as_secs_f64();

    let rows = prep.source.rows();
    let matches = parts.iter().map(|p| p.matches).sum();
    let input_bytes = ledger
        .sum(|k| k.direction == crate::ledger::Direction::Read)
        .bytes;
    let summary = RunSummary {
        files,
        rows,
        input_bytes,
        matches,
        requested_selectivity: requested_selectivity(prep),
        ledger,
        parts,
        gen_s,
        kernel_s,
        write_s,
        isa: isa.name(),
    };
    let timing = serde_json::json!({
        "threads": rayon::current_num_threads(),
        "isa": summary.isa,
        "generate_s": gen_s,
        "kernel_s": kernel_s,
        "write_s": write_s,
        "kernel_gbps": if kernel_s > 0.0 { input_bytes as f64 / kernel_s / 1e9 } else { 0.0 },
        "partitions": summary.parts,
    });
    let rel = w.rel("timing.json");
    let mut f = dir.file(&rel)?;
    writeln!(
        f,
        "{}",
        serde_json::to_string_pretty(&timing).expect("json")
    )
    .map_err(w.io(&rel))?;
    f.finish().map_err(w.io(&rel))?;
    Ok(summary)
}

fn requested_selectivity(prep: &Prepared) -> Option<f64> {
    prep.spec.input.columns.iter().find_map(|c| {
        if c.dist.as_deref() == Some("select") {
            c.selectivity
        } else {
            None
        }
    })
}
