//! The memory-system model: hand-computed cases per resource kind, the presets' published
//! figures, properties, sweeps, measured counters and bad input.

mod util;

use proptest::prelude::*;
use weir::layout::Placement;
use weir::ledger::{Direction, Key, Ledger, Phase, Region, Traffic};
use weir::memsys::measured::{counter_diffs, read_counters};
use weir::memsys::placement::remap;
use weir::memsys::sweep::{sweep, sweep_csv, SweepPoint};
use weir::memsys::{evaluate, Device, Resource};

const SCAN: Phase = Phase::single("scan");

fn dev(words: u64, bytes: u64, rows: u64, engine: u32, ch: u32, dir: Direction) -> (Key, Traffic) {
    (
        Key::device(engine, SCAN, ch, dir),
        Traffic { bytes, words, rows },
    )
}

fn ledger(entries: &[(Key, Traffic)]) -> Ledger {
    let mut l = Ledger::new();
    for (k, t) in entries {
        l.add(*k, *t);
    }
    l
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs())
}

#[test]
fn a_512_bit_port_at_200_mhz_moves_12_8_gb_per_s() {
    // Arithmetic: 512 bits × 200e6 /s / 8 = 12.8e9 bytes/s.
    let d = Device::preset("hbm2x2").unwrap();
    assert!(close(d.ports.gbps(), 12.8));
    // One engine reads 1e6 words of 64 bytes from its own channel; the channel (16 GB/s)
    // is faster, so the port sets the time: 64e6 / 12.8e9 = 5 ms.
    let l = ledger(&[dev(1_000_000, 64_000_000, 0, 0, 0, Direction::Read)]);
    let p = evaluate(&d, &l, 512).unwrap();
    assert!(close(p.total_s, 5e-3), "{}", p.total_s);
    assert_eq!(p.phases[0].bottleneck, Resource::PortRead(0));
}

#[test]
fn the_hbm2_preset_has_256_gb_per_s_per_stack() {
    // JEDEC JESD235A: 1024-bit interface per stack at 2 Gb/s per pin = 256 GB/s per
    // stack; 16 pseudo-channels of 64 bits per stack, two stacks.
    let d = Device::preset("hbm2x2").unwrap();
    assert_eq!(d.channels.count, 32);
    assert!(close(
        d.channels.gbps * f64::from(d.channels.count / 2),
        256.0
    ));
    assert!(close(64.0 * 2.0 / 8.0, d.channels.gbps));
}

#[test]
fn the_ddr4_preset_has_25_6_gb_per_s_per_channel() {
    // JEDEC DDR4-3200 speed grade: 3200 MT/s × 8 bytes = 25.6 GB/s per channel.
    let d = Device::preset("ddr4x2").unwrap();
    assert_eq!(d.channels.count, 2);
    assert!(close(d.channels.gbps, 3200e6 * 8.0 / 1e9));
}

#[test]
fn a_channel_counts_whole_access_units() {
    // 10 words of 4 bytes = 40 bytes, in 32-byte units: 2 units = 64 bytes (the model's
    // rule); on a 16 GB/s channel that is 4 ns.
    let d = Device::from_toml("preset = \"hbm2x2\"\n[ports]\nwidth_bits = 4096\n", "test").unwrap();
    let l = ledger(&[dev(10, 40, 10, 0, 0, Direction::Read)]);
    let p = evaluate(&d, &l, 32).unwrap();
    let ch = p.phases[0]
        .resources
        .iter()
        .find(|u| u.resource == Resource::Channel(0))
        .unwrap();
    assert_eq!(ch.bytes, 64);
    assert!(close(p.total_s, 64.0 / 16e9));
    assert_eq!(p.phases[0].bottleneck, Resource::Channel(0));
}

#[test]
fn traffic_between_switch_groups_crosses_both_lateral_links() {
    // Engine 0 (group 0) reads channel 4 (group 1, groups of 4): 64e6 bytes cross both
    // groups' lateral links; at 8 GB/s that is 8 ms, longer than the channel's 4 ms
    // (64e6 / 16e9) and the port's 5 ms, so a lateral link is the bottleneck.
    let d = Device::from_toml(
        "preset = \"hbm2x2\"\n[interconnect]\nlateral_gbps = 8.0\n",
        "test",
    )
    .unwrap();
    let l = ledger(&[dev(1_000_000, 64_000_000, 0, 0, 4, Direction::Read)]);
    let p = evaluate(&d, &l, 512).unwrap();
    let lat: Vec<_> = p.phases[0]
        .resources
        .iter()
        .filter(|u| matches!(u.resource, Resource::Lateral(_)))
        .collect();
    assert_eq!(lat.len(), 2);
    assert!(close(p.total_s, 8e-3));
    assert!(matches!(p.phases[0].bottleneck, Resource::Lateral(_)));
}

#[test]
fn efficiency_scales_the_estimate_not_the_bound() {
    let d = Device::from_toml("preset = \"hbm2x2\"\n[ports]\nefficiency = 0.5\n", "test").unwrap();
    let l = ledger(&[dev(1_000_000, 64_000_000, 0, 0, 0, Direction::Read)]);
    let p = evaluate(&d, &l, 512).unwrap();
    assert!(close(p.peak_total_s, 5e-3));
    assert!(close(p.total_s, 10e-3));
}

#[test]
fn host_transfers_overlap_only_when_the_device_says_so() {
    let mut l = ledger(&[dev(1_000_000, 64_000_000, 0, 0, 0, Direction::Read)]);
    let host = Key {
        engine: 0,
        phase: Phase::single("load"),
        region: Region::HostLink,
        channel: None,
        direction: Direction::Write,
    };
    // 1e6 words × 64 B = 64e6 B over a 16 GB/s host link = 4 ms; the scan phase is 5 ms.
    l.add(
        host,
        Traffic {
            bytes: 64_000_000,
            words: 1_000_000,
            rows: 0,
        },
    );
    let base = "preset = \"hbm2x2\"\n[host]\ngbps = 16.0\n";
    let seq = evaluate(&Device::from_toml(base, "t").unwrap(), &l, 512).unwrap();
    assert!(close(seq.total_s, 4e-3 + 5e-3));
    let ovl = evaluate(
        &Device::from_toml(&format!("{base}overlap = true\n"), "t").unwrap(),
        &l,
        512,
    )
    .unwrap();
    assert!(close(ovl.total_s, 5e-3));
}

/// A scan-like ledger: `rows` u32 rows in, `sel × rows` u32 row ids out, one engine,
/// 512-bit words, both on channel 0.
fn scan_ledger(rows: u64, sel: f64) -> Ledger {
    let out_rows = (rows as f64 * sel).round() as u64;
    ledger(&[
        dev(rows * 4 / 64, rows * 4, rows, 0, 0, Direction::Read),
        dev(
            (out_rows * 4).div_ceil(64),
            out_rows * 4,
            out_rows,
            0,
            0,
            Direction::Write,
        ),
    ])
}

#[test]
fn a_shared_port_consumes_at_port_rate_over_one_plus_selectivity_times_output_ratio() {
    // Derived from the model's definition (not an outside source): on a port shared by
    // reads and writes, time = (in + out bytes) / port bw and out = s × r × in, so the
    // consumption rate in / time = port bw / (1 + s × r); here r = 4 bytes of row id per
    // 4-byte row = 1.
    let d = Device::from_toml("preset = \"hbm2x2\"\n[ports]\nshared = true\n", "t").unwrap();
    let port = d.ports.gbps();
    for sel in [0.0, 0.0625, 0.25, 0.5, 1.0] {
        let p = evaluate(&d, &scan_ledger(1 << 20, sel), 512).unwrap();
        let expected = port / (1.0 + sel * 1.0);
        assert!(
            close(p.phases[0].consumed_gbps, expected),
            "sel {sel}: {} vs {expected}",
            p.phases[0].consumed_gbps
        );
        assert_eq!(p.phases[0].bottleneck, Resource::Port(0));
    }
}

/// Random device ledgers: up to 8 engines on up to 8 channels, one phase.
fn arb_ledger() -> impl Strategy<Value = Ledger> {
    prop::collection::vec((0u32..8, 0u32..8, any::<bool>(), 0u64..100_000), 1..24).prop_map(|v| {
        let mut l = Ledger::new();
        for (e, c, w, words) in v {
            let dir = if w { Direction::Write } else { Direction::Read };
            l.add(
                Key::device(e, SCAN, c, dir),
                Traffic {
                    bytes: words * 64,
                    words,
                    rows: words,
                },
            );
        }
        l
    })
}

fn crossbar() -> Device {
    Device::from_toml(
        "preset = \"hbm2x2\"\n[interconnect]\nkind = \"crossbar\"\n",
        "t",
    )
    .unwrap()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn adding_traffic_never_lowers_predicted_time(l in arb_ledger(), e in 0u32..8, c in 0u32..8, words in 0u64..100_000) {
        let d = Device::preset("hbm2x2").unwrap();
        let before = evaluate(&d, &l, 512).unwrap();
        let mut more = l.clone();
        more.add(Key::device(e, SCAN, c, Direction::Read), Traffic { bytes: words * 64, words, rows: 0 });
        let after = evaluate(&d, &more, 512).unwrap();
        prop_assert!(after.total_s >= before.total_s);
        prop_assert!(after.peak_total_s >= before.peak_total_s);
    }

    #[test]
    fn spreading_traffic_over_more_channels_never_raises_it(l in arb_ledger()) {
        let d = crossbar();
        let packed = remap(&l, &Placement::Packed, 32).unwrap();
        let spread = remap(&l, &Placement::Spread, 32).unwrap();
        let tp = evaluate(&d, &packed, 512).unwrap().total_s;
        let ts = evaluate(&d, &spread, 512).unwrap().total_s;
        prop_assert!(ts <= tp * (1.0 + 1e-12), "spread {ts} packed {tp}");
    }

    #[test]
    fn model_totals_equal_ledger_totals(l in arb_ledger()) {
        let p = evaluate(&Device::preset("hbm2x2").unwrap(), &l, 512).unwrap();
        let read = l.sum(|k| k.region == Region::Device && k.direction == Direction::Read);
        let write = l.sum(|k| k.region == Region::Device && k.direction == Direction::Write);
        prop_assert_eq!(p.read_bytes, read.bytes);
        prop_assert_eq!(p.write_bytes, write.bytes);
        let port_bytes: u64 = p.phases.iter().flat_map(|ph| &ph.resources)
            .filter(|u| matches!(u.resource, Resource::PortRead(_) | Resource::PortWrite(_)))
            .map(|u| u.bytes).sum();
        prop_assert_eq!(port_bytes, (read.words + write.words) * 64);
    }
}

/// A hand-built sweep ledger: `engines` engines each reading `words` words, on the
/// channel `placement` gives them.
fn sweep_ledger(engines: u32, spread: bool, words: u64) -> Ledger {
    let mut l = Ledger::new();
    for e in 0..engines {
        let c = if spread { e } else { 0 };
        l.add(
            Key::device(e, SCAN, c, Direction::Read),
            Traffic {
                bytes: words * 64,
                words,
                rows: words * 16,
            },
        );
    }
    l
}

#[test]
fn on_hbm_spread_rises_with_engines_and_packed_stays_flat() {
    let d = Device::preset("hbm2x2").unwrap();
    let mut points = Vec::new();
    for series in ["spread", "packed"] {
        for e in [1u32, 2, 4, 8, 16, 32] {
            points.push(SweepPoint {
                series: series.into(),
                engines: e,
                ledger: sweep_ledger(e, series == "spread", 1 << 16),
            });
        }
    }
    let rows = sweep(&d, &points, 512).unwrap();
    let spread: Vec<f64> = rows
        .iter()
        .filter(|r| r.series == "spread")
        .map(|r| r.aggregate_gbps)
        .collect();
    let packed: Vec<f64> = rows
        .iter()
        .filter(|r| r.series == "packed")
        .map(|r| r.aggregate_gbps)
        .collect();
    // Each engine's 12.8 GB/s port sets the rate while it has its own channel: n × 12.8.
    for (i, e) in [1.0, 2.0, 4.0, 8.0, 16.0, 32.0].iter().enumerate() {
        assert!(close(spread[i], e * 12.8), "{spread:?}");
    }
    // All on channel 0: 12.8 GB/s for one engine, then the 16 GB/s channel saturates.
    assert!(close(packed[0], 12.8));
    for p in &packed[1..] {
        assert!(close(*p, 16.0), "{packed:?}");
    }
    let csv = sweep_csv(&rows);
    assert_eq!(csv.lines().count(), 1 + 12);
    assert!(csv.starts_with("series,engines,predicted_s"));
}

#[test]
fn counters_read_as_a_ledger_and_differ_from_golden_where_they_should() {
    let golden = ledger(&[
        dev(100, 6400, 1600, 0, 0, Direction::Read),
        dev(3, 150, 0, 0, 0, Direction::Write),
    ]);
    let csv = "engine,phase,channel,direction,bytes,words,cycles\n0,scan,0,read,,100,1000\n0,scan,0,write,192,,\n";
    let m = read_counters(csv, 512, 200.0, "c.csv").unwrap();
    // 1000 cycles at 200 MHz = 5 µs.
    assert!(close(m.phase_s[&SCAN], 5e-6));
    let diffs = counter_diffs(&golden, &m.ledger);
    assert_eq!(diffs.len(), 2);
    assert_eq!(diffs[0].diff_words, 0);
    assert_eq!((diffs[1].measured_words, diffs[1].diff_words), (3, 0));
    let bad = read_counters(
        "engine,phase,direction,bytes\n0,scan,sideways,5\n",
        512,
        200.0,
        "c.csv",
    )
    .unwrap_err();
    assert!(bad.to_string().contains("c.csv: line 2"), "{bad}");
}

fn demo_like_run(t: &util::TempDir) -> std::path::PathBuf {
    let l = sweep_ledger(8, true, 1 << 12);
    t.write(
        "run/ledger.json",
        &serde_json::to_string(&l.to_json(512)).unwrap(),
    );
    t.join("run")
}

#[test]
fn plan_writes_plan_json_and_reports_the_baseline_source() {
    let t = util::TempDir::new("memsys-plan");
    let run = demo_like_run(&t);
    t.write("run/timing.json", "{\"kernel_s\": 0.01}");
    let out = util::weir(&["plan", run.to_str().unwrap(), "--device", "hbm2x2"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(
        out.stdout.contains("not a timing sign-off") && out.stdout.contains("timing.json"),
        "{}",
        out.stdout
    );
    let plan: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(run.join("plan.json")).unwrap()).unwrap();
    assert_eq!(plan["phases"][0]["phase"], "scan");
    let speedup = plan["baseline"]["speedup"].as_f64().unwrap();
    assert!(close(speedup, 0.01 / plan["total_s"].as_f64().unwrap()));
    // A plan.json weir did not write is never replaced.
    std::fs::write(run.join("plan.json"), "{\"mine\": true}").unwrap();
    let out = util::weir(&["plan", run.to_str().unwrap(), "--device", "hbm2x2"]);
    assert_eq!(out.code, 2);
    assert_eq!(
        std::fs::read_to_string(run.join("plan.json")).unwrap(),
        "{\"mine\": true}"
    );
}

#[test]
fn bad_input_is_one_line_and_exit_2() {
    let t = util::TempDir::new("memsys-bad");
    let run = demo_like_run(&t);
    let r = run.to_str().unwrap();
    let neg = t.write("neg.toml", "preset = \"ddr4x2\"\n[channels]\ngbps = -3.0\n");
    let zero = t.write("zero.toml", "preset = \"ddr4x2\"\n[host]\ngbps = 0.0\n");
    let missing = t.write("missing.toml", "[channels]\ncount = 2\n");
    let typo = t.write(
        "typo.toml",
        "preset = \"ddr4x2\"\n[channels]\nbandwidth = 3.0\n",
    );
    let place = t.write("place.txt", "0 1 2 3 4 5 6 99\n");
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (vec!["--device", "no-such-device"], "hbm2x2, ddr4x2"),
        (
            vec!["--device", neg.to_str().unwrap()],
            "channels.gbps` = -3",
        ),
        (vec!["--device", zero.to_str().unwrap()], "host.gbps` = 0"),
        (vec!["--device", missing.to_str().unwrap()], "is missing"),
        (vec!["--device", typo.to_str().unwrap()], "bandwidth"),
        (
            vec!["--device", "hbm2x2", "--placement", place.to_str().unwrap()],
            "channel 99",
        ),
        (vec!["--device", "ddr4x2"], "channel 2"),
    ];
    for (args, needle) in cases {
        let mut a = vec!["plan", r];
        a.extend(args);
        let out = util::weir(&a);
        assert_eq!(out.code, 2, "{a:?}: {}", out.stderr);
        assert_eq!(out.stderr.trim_end().lines().count(), 1, "{}", out.stderr);
        assert!(out.stderr.contains(needle), "{a:?}: {}", out.stderr);
    }
    let newer = t.write(
        "new/ledger.json",
        "{\"format_version\": 99, \"word_bits\": 512, \"entries\": []}",
    );
    let out = util::weir(&[
        "plan",
        newer.parent().unwrap().to_str().unwrap(),
        "--device",
        "hbm2x2",
    ]);
    assert_eq!(out.code, 2);
    assert!(
        out.stderr.contains("format_version 99 is newer"),
        "{}",
        out.stderr
    );
}

/// `weir plan JOB.toml --sweep`: every point of engines × placement × selectivity runs
/// ledger-only and lands in sweep.csv; spreading four engines over four channels predicts
/// more bandwidth than packing them on one, and a denser scan writes more, so it never
/// consumes input faster (both follow from the model's definition: time is the busiest
/// resource's bytes over its bandwidth).
#[test]
fn sweeps_of_a_job_cover_every_point() {
    let t = util::TempDir::new("sweep-job");
    let out = t.join("sweep");
    let o = util::weir(&[
        "plan",
        util::repo("data/jobs/scan-testbench.toml")
            .to_str()
            .unwrap(),
        "--device",
        "hbm2x2",
        "--sweep",
        "engines=1..4",
        "--sweep",
        "placement=spread,packed",
        "--sweep",
        "selectivity=0.05,0.5",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let csv = std::fs::read_to_string(out.join("sweep.csv")).unwrap();
    let rows: Vec<Vec<String>> = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    assert_eq!(rows.len(), 2 * 2 * 4, "{csv}");
    let at = |series: &str, engines: &str, col: usize| -> f64 {
        rows.iter()
            .find(|r| r[0] == series && r[1] == engines)
            .unwrap_or_else(|| panic!("{series} {engines} missing:\n{csv}"))[col]
            .parse()
            .unwrap()
    };
    // Column 4 is aggregate GB/s, column 5 consumed GB/s.
    assert!(at("spread selectivity=0.05", "4", 4) > at("packed selectivity=0.05", "4", 4));
    assert!(at("spread selectivity=0.5", "4", 5) <= at("spread selectivity=0.05", "4", 5));
    assert!(out.join("sweep.svg").is_file());
    // A second sweep into the same directory needs --force.
    let again = util::weir(&[
        "plan",
        util::repo("data/jobs/scan-testbench.toml")
            .to_str()
            .unwrap(),
        "--device",
        "hbm2x2",
        "--sweep",
        "engines=1..2",
        "--sweep",
        "placement=spread",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(again.code, 2, "{}", again.stdout);
}
