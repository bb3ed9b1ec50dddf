//! SGD as a job: the runner's record image and golden models equal what the library
//! computes from the same generator, outputs do not depend on the thread count, `weir check`
//! compares float models within a tolerance and names the record and coordinate, and bad
//! jobs are one-line errors.

mod util;

use std::path::Path;

use weir::gen::sgd::{Labels, SamplesGen};
use weir::kernels::sgd::*;
use weir::table::QFormat;

use util::{repo, tree, weir, TempDir};

fn run(job: &Path, out: &Path, threads: &str) {
    let o = weir(&[
        "run",
        job.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--threads",
        threads,
    ]);
    assert_eq!(o.code, 0, "{}", o.stderr);
}

/// Runs `job` into `a` on one thread and into `b` on two, and checks that every file but
/// `timing.json` is byte-identical.
fn same_on_one_and_two_threads(job: &Path, a: &Path, b: &Path) {
    run(job, a, "1");
    run(job, b, "2");
    let (ta, tb) = (tree(a), tree(b));
    assert_eq!(ta.len(), tb.len());
    for ((pa, da), (pb, db)) in ta.iter().zip(&tb) {
        assert_eq!(pa, pb);
        if pa != "timing.json" {
            assert!(da == db, "{pa} differs between 1 and 2 threads");
        }
    }
}

fn read(p: &Path) -> Vec<u8> {
    std::fs::read(p).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

fn io(engine: u32, word_bytes: u64) -> SgdIo {
    SgdIo {
        engine,
        word_bytes,
        channel: 0,
        data_base: 0,
        model_base: 0,
    }
}

fn models(ms: &[Model]) -> Vec<u8> {
    ms.iter().flat_map(Model::to_bytes).collect()
}

fn losses(r: &SgdEngineResult) -> Vec<u8> {
    r.losses.iter().flat_map(|l| l.to_le_bytes()).collect()
}

/// The parameters `data/jobs/sgd-sweep.toml` states.
fn sweep_params() -> SgdParams {
    let h = |eta| Hyper {
        step: Step { eta, decay: 0.0 },
        l2: 0.001,
    };
    SgdParams {
        loss: Loss::Squared,
        batch: 16,
        hyper: h(0.2),
        bias: true,
        epochs: 5,
        order: Order::Shuffle { seed: 3 },
        tol: None,
        numeric: Numeric::F32 {
            lanes: 16,
            ftz: false,
        },
        engines: EngineMode::Independent {
            sweep: vec![h(0.2), h(0.1), h(0.05), h(0.02)],
        },
        capacity: None,
        block_epochs: 1,
        snapshots: 8,
        pad_records: false,
        quant: None,
    }
}

#[test]
fn the_sweep_job_writes_the_image_and_models_the_library_computes() {
    let t = TempDir::new("sgd-job-sweep");
    let out = t.join("out");
    run(&repo("data/jobs/sgd-sweep.toml"), &out, "2");
    let data = SamplesGen {
        rows: 2048,
        dims: 16,
        seed: 11,
        scale: vec![1.0],
        noise: 0.1,
        bias: 0.5,
        labels: Labels::Regression,
    }
    .generate()
    .data;
    let p = sweep_params();
    let image = read(&out.join("input/samples.rows.bin"));
    let want = record_bytes(&data, &p, 64);
    assert_eq!(&image[..want.len()], &want[..], "record image");
    for e in 0..4u32 {
        let r = train_engine(&data, &p, &io(e, 64)).expect("trains");
        let g = |name: &str| read(&out.join(format!("golden/sgd.p{e}.{name}.bin")));
        let cut = |b: Vec<u8>, n: usize| b[..n].to_vec();
        let m = r.model.to_bytes();
        assert_eq!(cut(g("model"), m.len()), m, "engine {e} model");
        let ep = models(&r.epoch_models);
        assert_eq!(cut(g("epochs"), ep.len()), ep, "engine {e} epochs");
        let sn = models(&r.snapshots);
        assert_eq!(r.snapshots.len(), 8);
        assert_eq!(cut(g("batches"), sn.len()), sn, "engine {e} snapshots");
        let l = losses(&r);
        assert_eq!(cut(g("loss"), l.len()), l, "engine {e} losses");
    }
    // Smaller steps learn more slowly: engine 3 (η = 0.02) ends above engine 0 (η = 0.2)
    // after the first epoch.
    let first = |e: u32| {
        let b = read(&out.join(format!("arrays/sgd.p{e}.loss.npy")));
        let body = &b[b.len() - 5 * 8..];
        f64::from_le_bytes(body[..8].try_into().unwrap())
    };
    assert!(first(3) > first(0), "{} vs {}", first(3), first(0));
}

#[test]
fn the_fixed_point_job_reads_q_records_and_averages_like_the_library() {
    let t = TempDir::new("sgd-job-fixed");
    let (a, b) = (t.join("one"), t.join("two"));
    let job = repo("data/jobs/sgd-fixed.toml");
    same_on_one_and_two_threads(&job, &a, &b);
    let data = SamplesGen {
        rows: 4096,
        dims: 7,
        seed: 12,
        scale: vec![1.0],
        noise: 0.0,
        bias: 0.0,
        labels: Labels::Logistic,
    }
    .generate()
    .data;
    let q = |int_bits, frac_bits| QFormat {
        int_bits,
        frac_bits,
    };
    let p = SgdParams {
        loss: Loss::Logistic,
        batch: 32,
        hyper: Hyper {
            step: Step {
                eta: 0.5,
                decay: 0.0,
            },
            l2: 0.0,
        },
        bias: true,
        epochs: 3,
        order: Order::Input,
        tol: None,
        numeric: Numeric::Fixed(FixedSpec {
            data: q(3, 12),
            model: q(7, 24),
            acc: q(15, 40),
            rounding: Rounding::Stochastic,
            overflow: Overflow::Saturate,
            lfsr_seed: 1,
            sigmoid_bits: 8,
        }),
        engines: EngineMode::Averaging { engines: 2 },
        capacity: Some(32768),
        block_epochs: 1,
        snapshots: 0,
        pad_records: false,
        quant: None,
    };
    let image = read(&a.join("input/samples.rows.bin"));
    let want = record_bytes(&data, &p, 32);
    assert_eq!(&image[..want.len()], &want[..], "Q3.12 record image");
    let rs = train(&data, &p, &[io(0, 32), io(1, 32)]).expect("trains");
    for (e, r) in rs.iter().enumerate() {
        let m = r.model.to_bytes();
        let got = read(&a.join(format!("golden/sgd.p{e}.model.bin")));
        assert_eq!(&got[..m.len()], &m[..], "engine {e} model");
        assert!(
            !a.join(format!("golden/sgd.p{e}.batches.bin")).exists(),
            "no snapshots were asked for"
        );
    }
    // Averaged engines hold the same model after every epoch.
    assert_eq!(rs[0].epoch_models, rs[1].epoch_models);
}

#[test]
fn the_4bit_job_streams_packed_codes_and_trains_on_their_values() {
    let t = TempDir::new("sgd-job-4bit");
    let (a, b) = (t.join("one"), t.join("two"));
    let job = repo("data/jobs/sgd-4bit.toml");
    same_on_one_and_two_threads(&job, &a, &b);
    let source = SamplesGen {
        rows: 4096,
        dims: 10,
        seed: 21,
        scale: vec![1.0, 0.5],
        noise: 0.05,
        bias: -0.25,
        labels: Labels::Regression,
    }
    .generate()
    .data;
    let (lo, hi): (Vec<f32>, Vec<f32>) = (0..10)
        .map(|j| if j % 2 == 0 { (-3.0, 3.0) } else { (-1.5, 1.5) })
        .unzip();
    let quant = Quant::new(4, &lo, &hi, Outside::Clamp).expect("the job's ranges");
    let coded = quant.quantise(&source).expect("finite data");
    assert!(coded.clamped > 0, "three-sigma ranges clamp a few values");
    let data = coded.data;
    let p = SgdParams {
        loss: Loss::Squared,
        batch: 32,
        hyper: Hyper {
            step: Step {
                eta: 0.05,
                decay: 0.0,
            },
            l2: 0.0,
        },
        bias: true,
        epochs: 4,
        order: Order::Shuffle { seed: 5 },
        tol: None,
        numeric: Numeric::F32 {
            lanes: 8,
            ftz: false,
        },
        engines: EngineMode::Averaging { engines: 2 },
        capacity: None,
        block_epochs: 1,
        snapshots: 2,
        pad_records: false,
        quant: Some(quant.clone()),
    };
    // Ten 4-bit codes in 5 bytes, then the f32 label: 9-byte records, packed.
    let image = read(&a.join("input/samples.rows.bin"));
    let want = record_bytes(&data, &p, 32);
    assert_eq!(want.len(), 4096 * 9);
    assert_eq!(&image[..want.len()], &want[..], "4-bit record image");
    assert_eq!(
        record_bytes(&source, &p, 32),
        want,
        "source and values code alike"
    );
    // Unpacking the image by the stated layout gives the values training reads.
    for (r, rec) in image[..want.len()].chunks_exact(9).enumerate() {
        for j in 0..10 {
            let code = (rec[j / 2] >> (4 * (j % 2))) & 0xF;
            assert_eq!(quant.value(j, code), data.features[[r, j]], "row {r} x{j}");
        }
        assert_eq!(rec[5..9], data.labels[r].to_le_bytes(), "row {r} label");
    }
    let refused = train(&source, &p, &[io(0, 32), io(1, 32)]).unwrap_err();
    assert!(
        refused
            .to_string()
            .contains("is not the value of a 4-bit code"),
        "{refused}"
    );
    let rs = train(&data, &p, &[io(0, 32), io(1, 32)]).expect("trains");
    for (e, r) in rs.iter().enumerate() {
        let g = |name: &str| read(&a.join(format!("golden/sgd.p{e}.{name}.bin")));
        let m = r.model.to_bytes();
        assert_eq!(&g("model")[..m.len()], &m[..], "engine {e} model");
        let ep = models(&r.epoch_models);
        assert_eq!(&g("epochs")[..ep.len()], &ep[..], "engine {e} epochs");
        let table: Vec<u8> = (0..10)
            .flat_map(|j| [quant.lo()[j].to_le_bytes(), quant.step()[j].to_le_bytes()].concat())
            .collect();
        assert_eq!(&g("dequant")[..table.len()], &table[..], "engine {e} table");
        // Per epoch each engine streams 2048 records of 5 code bytes and a 4-byte label.
        assert_eq!(r.feature_bytes, [2048 * 5; 4], "engine {e} feature bytes");
        assert_eq!(r.label_bytes, [2048 * 4; 4], "engine {e} label bytes");
    }
    // The ledger counts 9-byte records: each averaging engine streams its half of the
    // samples per epoch, and loads the whole image once.
    let ledger: serde_json::Value =
        serde_json::from_slice(&read(&a.join("ledger.json"))).expect("ledger json");
    let bytes = |phase: &str, direction: &str| -> Vec<u64> {
        ledger["entries"]
            .as_array()
            .expect("entries")
            .iter()
            .filter(|x| {
                x["phase"] == phase && x["region"] == "device" && x["direction"] == direction
            })
            .map(|x| x["bytes"].as_u64().expect("bytes"))
            .collect()
    };
    for e in 0..4 {
        assert_eq!(
            bytes(&format!("epoch[{e}]"), "read"),
            [2048 * 9; 2],
            "epoch {e}"
        );
    }
    assert_eq!(bytes("load[0]", "write"), [4096 * 9; 2]);
    // The job puts engine e on channel e: one training serves both coupled engines, and
    // each engine's device traffic still names its own channel.
    for x in ledger["entries"].as_array().expect("entries") {
        if x["region"] == "device" {
            assert_eq!(x["channel"], x["engine"], "{x}");
        }
    }
    let vh = String::from_utf8(read(&a.join("memory_map.vh"))).unwrap();
    assert!(vh.contains("SGD_RECORD_BYTES = 32'd9;"), "{vh}");
    assert!(vh.contains("SGD_QUANT_BITS = 32'd4;"), "{vh}");
    // step of ±1.5 in 15 steps is the f32 nearest 0.2 (0x3E4CCCCD = 1045220557).
    assert!(vh.contains("SGD_QUANT_STEP_1 = 32'd1045220557;"), "{vh}");
}

#[test]
fn check_compares_float_models_within_a_tolerance() {
    let t = TempDir::new("sgd-job-check");
    let out = t.join("out");
    run(&repo("data/jobs/sgd-sweep.toml"), &out, "2");
    let mut dump = read(&out.join("golden/sgd.p1.epochs.bin"));
    // Model after epoch index 3, coordinate w7 (17 f32 per record): 3 ulps up.
    let at = (3 * 17 + 7) * 4;
    let v = u32::from_le_bytes(dump[at..at + 4].try_into().unwrap());
    dump[at..at + 4].copy_from_slice(&(v + 3).to_le_bytes());
    let path = t.write("dump.bin", "");
    std::fs::write(&path, &dump).unwrap();
    let check = |extra: &[&str]| {
        let mut args = vec![
            "check",
            out.to_str().unwrap(),
            path.to_str().unwrap(),
            "--output",
            "sgd.p1.epochs",
        ];
        args.extend_from_slice(extra);
        weir(&args)
    };
    let exact = check(&[]);
    assert_eq!(exact.code, 1, "{}", exact.stdout);
    assert!(exact.stdout.contains("record 3 "), "{}", exact.stdout);
    let near = check(&["--ulps", "3"]);
    assert_eq!(near.code, 0, "{}", near.stdout);
    let far = check(&["--ulps", "2"]);
    assert_eq!(far.code, 1, "{}", far.stdout);
    // Only the coordinate outside the tolerance is listed, by name and value.
    assert!(far.stdout.contains("record 3 "), "{}", far.stdout);
    assert!(far.stdout.contains("expected w7="), "{}", far.stdout);
    assert!(!far.stdout.contains("w6="), "{}", far.stdout);
    let rel = check(&["--rel", "1e-5"]);
    assert_eq!(rel.code, 0, "{}", rel.stdout);
    let bad = check(&["--abs=-1"]);
    assert_eq!(bad.code, 2);
    assert!(bad.stderr.contains("--abs"), "{}", bad.stderr);
}

#[test]
fn bad_sgd_jobs_are_one_line_errors() {
    let t = TempDir::new("sgd-job-bad");
    let base = std::fs::read_to_string(repo("data/jobs/sgd-sweep.toml")).unwrap();
    let cases: [(&str, &str, &str); 6] = [
        (
            "order = \"row\"",
            "order = \"column\"",
            "layout.order = \"row\"",
        ),
        (
            "table = \"samples\"\n",
            "table = \"samples\"\nlabel = \"x3\"\n",
            "kernel.label",
        ),
        (
            "numeric = \"f32\"",
            "numeric = \"fixed\"",
            "the fixed mode reads i16",
        ),
        ("loss = \"squared\"", "loss = \"huber\"", "kernel.loss"),
        ("batch = 16", "batch = 4096", "minibatch size 4096"),
        (
            "step = [0.2, 0.1, 0.05, 0.02]",
            "step = [0.2, 0.1]",
            "kernel.step lists 2 values for 4 engines",
        ),
    ];
    for (i, (from, to, says)) in cases.iter().enumerate() {
        assert!(base.contains(from), "{from}");
        let job = t.write(&format!("bad{i}.toml"), &base.replacen(from, to, 1));
        let out = t.join(&format!("out{i}"));
        let o = weir(&["run", job.to_str().unwrap(), "--out", out.to_str().unwrap()]);
        assert_eq!(o.code, 2, "{to}: {}", o.stderr);
        assert!(o.stderr.contains(says), "{to}: {}", o.stderr);
        assert!(!out.exists(), "{to}: nothing is written");
    }
}
