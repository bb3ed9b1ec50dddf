//! Image writing against the disk: each image format (hex, bin, npy) is written to a file
//! through the runner's hashing writer, interleaved (`weir::bench::interleave`) with a
//! plain buffered write of the same number of bytes to the same directory, and reported as
//! the ratio of median times with the interquartile range of the per-pair ratios.
//!
//! `cargo bench --bench write [-- MIB [DIR]]`: payload MiB (default 256) and directory
//! (default the system temporary directory). Both files are overwritten in place, so the
//! page cache and the file system see the same work for both.
//!
//! A first row, `sha256`, hashes the payload without writing it, against the plain write
//! of as many bytes: every image is hashed whole, so no format's ratio can exceed it.

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use weir::bench::interleave::{interleave, Interleaved};
use weir::image::{write_bin, write_hex, write_npy_words};
use weir::job::outdir::HashWriter;
use weir::job::sha256_hex;

const WORD_BYTES: usize = 64;

fn sink(path: &Path) -> HashWriter<BufWriter<File>> {
    let f = File::create(path).expect("create bench file");
    HashWriter::new(BufWriter::with_capacity(1 << 20, f))
}

/// The reference: `bytes` bytes written to `path` in 1 MiB blocks through a BufWriter.
fn plain_write(path: &Path, bytes: usize) {
    static BLOCK: [u8; 1 << 20] = [0x5a; 1 << 20];
    let block = &BLOCK;
    let mut f = BufWriter::with_capacity(1 << 20, File::create(path).expect("create"));
    let mut left = bytes;
    while left > 0 {
        let n = left.min(block.len());
        f.write_all(&block[..n]).expect("plain write");
        left -= n;
    }
    f.flush().expect("flush");
}

/// One table row: the bytes, both rates, the ratio of medians and the quartiles of the
/// per-pair ratios.
fn row(name: &str, bytes: u64, m: &Interleaved) {
    let gb = bytes as f64 / 1e9;
    println!(
        "{name:6}  {:8.0}  {:10.2}  {:10.2}  {:11.2}  {:.2}–{:.2}",
        bytes as f64 / 1e6,
        gb / m.kernel.median_s,
        gb / m.reference.median_s,
        m.ratio,
        m.ratio_q1,
        m.ratio_q3
    );
}

fn main() {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    let mib: usize = args.first().and_then(|a| a.parse().ok()).unwrap_or(256);
    let dir = args
        .get(1)
        .map(PathBuf::from)
        .unwrap_or_else(std::env::temp_dir);
    let payload: Vec<u8> = (0..mib << 20)
        .map(|i| (i as u32).wrapping_mul(2_654_435_761) as u8)
        .collect();
    let (img, plain) = (
        dir.join("weir-write-bench.img"),
        dir.join("weir-write-bench.plain"),
    );
    println!(
        "{mib} MiB payload, {WORD_BYTES}-byte words, in {}; 5 pairs after a warm-up",
        dir.display()
    );
    println!("format  image MB  image GB/s  plain GB/s  image/plain  IQR");
    type Writer =
        fn(&mut HashWriter<BufWriter<File>>, usize, &[u8]) -> Result<u64, weir::image::ImageError>;
    let formats: [(&str, Writer); 3] = [
        ("hex", write_hex),
        ("bin", write_bin),
        ("npy", write_npy_words),
    ];
    let m = interleave(
        1,
        5,
        &mut || plain_write(&plain, payload.len()),
        &mut || {
            std::hint::black_box(sha256_hex(&payload));
        },
    );
    row("sha256", payload.len() as u64, &m);
    for (name, write) in formats {
        let mut w = sink(&img);
        write(&mut w, WORD_BYTES, &payload).expect("write image");
        let (out_bytes, _) = w.finish().expect("finish image");
        let m = interleave(
            1,
            5,
            &mut || plain_write(&plain, out_bytes as usize),
            &mut || {
                let mut w = sink(&img);
                write(&mut w, WORD_BYTES, &payload).expect("write image");
                std::hint::black_box(w.finish().expect("finish image"));
            },
        );
        row(name, out_bytes, &m);
    }
    let _ = std::fs::remove_file(&img);
    let _ = std::fs::remove_file(&plain);
}
