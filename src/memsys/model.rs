//! The bottleneck model: a first-order bandwidth bound of each ledger phase on a device.
//!
//! ```text
//!   ledger phase ─► streams (engine, region, channel, direction, words)
//!        │
//!        ├─► channel c ········ Σ traffic on c        ÷ channel bandwidth
//!        ├─► port e (or e rd/wr) Σ device traffic of e ÷ port bandwidth
//!        ├─► lateral group g ··· Σ traffic crossing g  ÷ lateral bandwidth
//!        ├─► onchip e ········· Σ on-chip traffic of e ÷ on-chip bandwidth
//!        └─► host link ········ Σ host-link traffic    ÷ host bandwidth
//!   phase time = max over resources; the arg-max is the bottleneck
//! ```
//!
//! Traffic rule: a stream moves `words × word_bytes` bytes (the ledger's words of the job's
//! width; a partial word counts whole). Through a memory channel that is rounded up to whole
//! access-granularity units: `ceil(words × word_bytes / granularity) × granularity` (a
//! ledger stream is sequential, so its words are contiguous). Ports, lateral links, on-chip
//! memory and the host link carry `words × word_bytes`.
//!
//! Totals: phases run one after another; when the device says host transfers overlap
//! compute, host-link time is taken out of each phase and the total is the larger of the
//! host-link sum and the sum of the rest.
//!
//! Every figure is computed twice: at peak bandwidth (the bound) and at peak × efficiency
//! (the calibrated estimate). This is a first-order bandwidth bound, not a timing sign-off.

use std::collections::BTreeMap;
use std::fmt;

use serde::Serialize;

use super::device::{Device, Interconnect};
use crate::ledger::{Direction, Ledger, Region};
use crate::{Error, Result};

/// The statement every report carries.
pub const BOUND_NOTE: &str = "first-order bandwidth bound from the ledger, not a timing sign-off";

/// A resource that traffic flows through.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Resource {
    /// A memory channel.
    Channel(u32),
    /// An engine's port shared by reads and writes.
    Port(u32),
    /// An engine port's read side.
    PortRead(u32),
    /// An engine port's write side.
    PortWrite(u32),
    /// A switch group's lateral link.
    Lateral(u32),
    /// An engine's on-chip memory.
    OnChip(u32),
    /// The host link.
    HostLink,
}

impl fmt::Display for Resource {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Resource::Channel(c) => write!(f, "channel {c}"),
            Resource::Port(e) => write!(f, "port {e}"),
            Resource::PortRead(e) => write!(f, "port {e} read"),
            Resource::PortWrite(e) => write!(f, "port {e} write"),
            Resource::Lateral(g) => write!(f, "lateral {g}"),
            Resource::OnChip(e) => write!(f, "onchip {e}"),
            Resource::HostLink => f.write_str("host link"),
        }
    }
}

impl Serialize for Resource {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}

/// One resource's share of a phase.
#[derive(Debug, Clone, Serialize)]
pub struct ResourceUse {
    /// Which resource.
    pub resource: Resource,
    /// Bytes through it (by the traffic rule).
    pub bytes: u64,
    /// Peak bandwidth, GB/s.
    pub peak_gbps: f64,
    /// Calibrated bandwidth (peak × efficiency), GB/s.
    pub gbps: f64,
    /// Calibrated busy time, s.
    pub time_s: f64,
    /// Calibrated busy time ÷ the phase's calibrated time.
    pub utilisation: f64,
}

/// A phase's prediction.
#[derive(Debug, Clone, Serialize)]
pub struct PhasePlan {
    /// Phase name (`scan`, `probe[2]`).
    pub phase: String,
    /// Calibrated time, s.
    pub time_s: f64,
    /// Peak-bandwidth bound, s.
    pub peak_time_s: f64,
    /// The resource that sets the calibrated time.
    pub bottleneck: Resource,
    /// The resource that sets the peak bound.
    pub peak_bottleneck: Resource,
    /// Device payload bytes read (rows consumed).
    pub read_bytes: u64,
    /// Device payload bytes written.
    pub write_bytes: u64,
    /// Payload bytes read per second at the calibrated time, GB/s.
    pub consumed_gbps: f64,
    /// Every resource the phase uses, in resource order.
    pub resources: Vec<ResourceUse>,
}

/// The prediction for a whole ledger.
#[derive(Debug, Clone, Serialize)]
pub struct Plan {
    /// What this is (and is not).
    pub note: &'static str,
    /// Device name.
    pub device: String,
    /// Word width of the ledger's words.
    pub word_bits: u32,
    /// Phases in ledger order.
    pub phases: Vec<PhasePlan>,
    /// Calibrated total, s.
    pub total_s: f64,
    /// Peak-bandwidth total, s.
    pub peak_total_s: f64,
    /// Whether host transfers were overlapped with compute.
    pub host_overlap: bool,
    /// Device payload bytes read, all phases.
    pub read_bytes: u64,
    /// Device payload bytes written, all phases.
    pub write_bytes: u64,
    /// Device bytes (read + written, payload) per second at the calibrated total, GB/s.
    pub aggregate_gbps: f64,
}

/// Bandwidth (peak, calibrated) of `r` on `d`, GB/s.
fn bandwidth(d: &Device, r: Resource) -> (f64, f64) {
    let (peak, eff) = match r {
        Resource::Channel(_) => (d.channels.gbps, d.channels.efficiency),
        Resource::Port(_) | Resource::PortRead(_) | Resource::PortWrite(_) => {
            (d.ports.gbps(), d.ports.efficiency)
        }
        Resource::Lateral(_) => match d.interconnect {
            Interconnect::Groups {
                lateral_gbps,
                efficiency,
                ..
            } => (lateral_gbps, efficiency),
            Interconnect::Crossbar => (f64::INFINITY, 1.0),
        },
        Resource::OnChip(_) => (d.onchip.gbps, d.onchip.efficiency),
        Resource::HostLink => (d.host.gbps, d.host.efficiency),
    };
    (peak, peak * eff)
}

/// Accumulates one phase's traffic per resource.
struct PhaseLoad {
    bytes: BTreeMap<Resource, u64>,
    read_bytes: u64,
    write_bytes: u64,
}

impl PhaseLoad {
    fn add(&mut self, r: Resource, b: u64) {
        *self.bytes.entry(r).or_default() += b;
    }
}

fn check_key(d: &Device, engine: u32, channel: Option<u32>) -> Result<()> {
    if engine >= d.ports.count {
        return Err(Error::input(format!(
            "the ledger has engine {engine}, but device `{}` has {} engine ports",
            d.name, d.ports.count
        )));
    }
    if let Some(c) = channel.filter(|&c| c >= d.channels.count) {
        return Err(Error::input(format!(
            "the ledger uses channel {c}, but device `{}` has {} channels (0..{}); try --placement",
            d.name,
            d.channels.count,
            d.channels.count - 1
        )));
    }
    Ok(())
}

/// Predicts every phase of `ledger` (words of `word_bits`) on `d`.
pub fn evaluate(d: &Device, ledger: &Ledger, word_bits: u32) -> Result<Plan> {
    let word_bytes = u64::from(word_bits.div_ceil(8));
    let g = u64::from(d.channels.granularity_bytes);
    let mut phases: Vec<(String, PhaseLoad)> = Vec::new();
    let mut index: BTreeMap<crate::ledger::Phase, usize> = BTreeMap::new();
    for (k, t) in ledger.entries() {
        check_key(d, k.engine, k.channel)?;
        let i = *index.entry(k.phase).or_insert_with(|| {
            phases.push((
                k.phase.to_string(),
                PhaseLoad {
                    bytes: BTreeMap::new(),
                    read_bytes: 0,
                    write_bytes: 0,
                },
            ));
            phases.len() - 1
        });
        let load = &mut phases[i].1;
        let moved = t.words * word_bytes;
        match (k.region, k.channel) {
            (Region::Device, Some(c)) => {
                load.add(Resource::Channel(c), moved.div_ceil(g) * g);
                let e = k.engine;
                load.add(
                    match (d.ports.shared, k.direction) {
                        (true, _) => Resource::Port(e),
                        (false, Direction::Read) => Resource::PortRead(e),
                        (false, Direction::Write) => Resource::PortWrite(e),
                    },
                    moved,
                );
                if let Interconnect::Groups { group_channels, .. } = d.interconnect {
                    let (from, to) = (e / group_channels, c / group_channels);
                    if from != to {
                        load.add(Resource::Lateral(from), moved);
                        load.add(Resource::Lateral(to), moved);
                    }
                }
                match k.direction {
                    Direction::Read => load.read_bytes += t.bytes,
                    Direction::Write => load.write_bytes += t.bytes,
                }
            }
            (Region::Device, None) => {
                return Err(Error::input(format!(
                    "ledger entry of engine {} in phase {} is device traffic without a channel",
                    k.engine, k.phase
                )))
            }
            (Region::OnChip, _) => load.add(Resource::OnChip(k.engine), moved),
            (Region::HostLink, _) => load.add(Resource::HostLink, moved),
        }
    }
    Ok(finish(d, word_bits, phases))
}

fn finish(d: &Device, word_bits: u32, loads: Vec<(String, PhaseLoad)>) -> Plan {
    let overlap = d.host.overlap;
    let mut plan = Plan {
        note: BOUND_NOTE,
        device: d.name.clone(),
        word_bits,
        phases: Vec::with_capacity(loads.len()),
        total_s: 0.0,
        peak_total_s: 0.0,
        host_overlap: overlap,
        read_bytes: 0,
        write_bytes: 0,
        aggregate_gbps: 0.0,
    };
    let (mut host_s, mut host_peak_s) = (0.0, 0.0);
    for (name, load) in loads {
        let mut uses: Vec<ResourceUse> = load
            .bytes
            .iter()
            .map(|(&r, &b)| {
                let (peak, cal) = bandwidth(d, r);
                ResourceUse {
                    resource: r,
                    bytes: b,
                    peak_gbps: peak,
                    gbps: cal,
                    time_s: b as f64 / (cal * 1e9),
                    utilisation: 0.0,
                }
            })
            .collect();
        let counted = |u: &&ResourceUse| !(overlap && u.resource == Resource::HostLink);
        let arg_max = |f: &dyn Fn(&ResourceUse) -> f64| {
            uses.iter()
                .filter(counted)
                .map(|u| (f(u), u.resource))
                .fold(
                    (0.0, Resource::HostLink),
                    |a, b| if b.0 > a.0 { b } else { a },
                )
        };
        let (time_s, bottleneck) = arg_max(&|u| u.time_s);
        let (peak_time_s, peak_bottleneck) = arg_max(&|u| u.bytes as f64 / (u.peak_gbps * 1e9));
        for u in &mut uses {
            u.utilisation = if time_s > 0.0 { u.time_s / time_s } else { 0.0 };
            if u.resource == Resource::HostLink && overlap {
                host_s += u.time_s;
                host_peak_s += u.bytes as f64 / (u.peak_gbps * 1e9);
            }
        }
        plan.total_s += time_s;
        plan.peak_total_s += peak_time_s;
        plan.read_bytes += load.read_bytes;
        plan.write_bytes += load.write_bytes;
        plan.phases.push(PhasePlan {
            phase: name,
            time_s,
            peak_time_s,
            bottleneck,
            peak_bottleneck,
            read_bytes: load.read_bytes,
            write_bytes: load.write_bytes,
            consumed_gbps: gbps(load.read_bytes, time_s),
            resources: uses,
        });
    }
    plan.total_s = plan.total_s.max(host_s);
    plan.peak_total_s = plan.peak_total_s.max(host_peak_s);
    plan.aggregate_gbps = gbps(plan.read_bytes + plan.write_bytes, plan.total_s);
    plan
}

/// `bytes / s` in GB/s, 0 for no time.
pub fn gbps(bytes: u64, s: f64) -> f64 {
    if s > 0.0 {
        bytes as f64 / s / 1e9
    } else {
        0.0
    }
}
