//! Device descriptions: the TOML form (every key optional, so a user file can override any
//! key of a preset), merging, and the checked [`Device`] the model uses.
//!
//! ```text
//!   preset text ─► DeviceFile ─┐
//!                              ├─ merge (user wins, key by key) ─► check ─► Device
//!   user file  ─► DeviceFile ──┘
//! ```
//!
//! Invariants of a checked [`Device`]: every bandwidth, clock, count and efficiency is
//! finite and above zero (an efficiency at most 1); counts and group sizes are at least 1.
//! Bandwidths are in GB/s (10^9 bytes per second).

use serde::{Deserialize, Serialize};

use super::presets;
use crate::{Error, Result};

/// `[channels]`: the device's memory channels.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ChannelsFile {
    count: Option<u32>,
    capacity_mib: Option<u64>,
    gbps: Option<f64>,
    granularity_bytes: Option<u32>,
    efficiency: Option<f64>,
}

/// `[ports]`: the engines' ports into the interconnect.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PortsFile {
    count: Option<u32>,
    width_bits: Option<u32>,
    clock_mhz: Option<f64>,
    shared: Option<bool>,
    efficiency: Option<f64>,
}

/// `[interconnect]`: between ports and channels.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InterconnectFile {
    kind: Option<String>,
    group_channels: Option<u32>,
    lateral_gbps: Option<f64>,
    efficiency: Option<f64>,
}

/// `[onchip]`: each engine's on-chip memory.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OnChipFile {
    kib_per_engine: Option<u64>,
    gbps: Option<f64>,
    efficiency: Option<f64>,
}

/// `[host]`: the link between host and device.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HostFile {
    gbps: Option<f64>,
    overlap: Option<bool>,
    efficiency: Option<f64>,
}

/// A device description as written: every key optional.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DeviceFile {
    preset: Option<String>,
    name: Option<String>,
    #[serde(default)]
    channels: ChannelsFile,
    #[serde(default)]
    ports: PortsFile,
    #[serde(default)]
    interconnect: InterconnectFile,
    #[serde(default)]
    onchip: OnChipFile,
    #[serde(default)]
    host: HostFile,
}

/// Keys of `over` that are set replace those of `base`.
macro_rules! overlay {
    ($base:expr, $over:expr, $($f:ident),+) => {
        $( if $over.$f.is_some() { $base.$f = $over.$f.clone(); } )+
    };
}

impl DeviceFile {
    /// Parses TOML text; `what` names the source in errors (with line and column).
    pub fn parse(text: &str, what: &str) -> Result<DeviceFile> {
        toml::from_str(text).map_err(|e| {
            Error::input(format!(
                "{what}: {}",
                e.to_string().replace('\n', " ").trim()
            ))
        })
    }

    fn overlay(mut self, o: &DeviceFile) -> DeviceFile {
        overlay!(self, o, name);
        overlay!(
            self.channels,
            o.channels,
            count,
            capacity_mib,
            gbps,
            granularity_bytes,
            efficiency
        );
        overlay!(self.ports, o.ports, count, width_bits, clock_mhz, shared, efficiency);
        overlay!(
            self.interconnect,
            o.interconnect,
            kind,
            group_channels,
            lateral_gbps,
            efficiency
        );
        overlay!(self.onchip, o.onchip, kib_per_engine, gbps, efficiency);
        overlay!(self.host, o.host, gbps, overlap, efficiency);
        self
    }
}

/// Memory channels.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Channels {
    /// Number of channels.
    pub count: u32,
    /// Capacity of each, MiB.
    pub capacity_mib: u64,
    /// Peak bandwidth of each, GB/s (reads and writes share it).
    pub gbps: f64,
    /// Smallest access in bytes: traffic counts whole units of it.
    pub granularity_bytes: u32,
    /// Achievable fraction of peak.
    pub efficiency: f64,
}

/// Engine ports: engine e uses port e.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Ports {
    /// Number of ports.
    pub count: u32,
    /// Data width, bits per clock.
    pub width_bits: u32,
    /// Clock, MHz.
    pub clock_mhz: f64,
    /// Reads and writes time-share one port (else each direction has its own).
    pub shared: bool,
    /// Achievable fraction of peak.
    pub efficiency: f64,
}

impl Ports {
    /// Peak bandwidth of one port (one direction when not shared), GB/s: bits × MHz / 8000.
    pub fn gbps(&self) -> f64 {
        f64::from(self.width_bits) * self.clock_mhz / 8000.0
    }
}

/// The interconnect between ports and channels.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Interconnect {
    /// Every port reaches every channel at full rate.
    Crossbar,
    /// Channels and ports in groups of `group_channels` (channel c and port p in groups
    /// c / G and p / G); traffic between groups crosses both groups' lateral links.
    Groups {
        /// Channels (and ports) per group.
        group_channels: u32,
        /// Peak bandwidth of each group's lateral link, GB/s.
        lateral_gbps: f64,
        /// Achievable fraction of peak.
        efficiency: f64,
    },
}

/// On-chip memory of each engine.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OnChip {
    /// Capacity per engine, KiB (carried for blocking; the model checks bandwidth).
    pub kib_per_engine: u64,
    /// Peak bandwidth per engine, GB/s.
    pub gbps: f64,
    /// Achievable fraction of peak.
    pub efficiency: f64,
}

/// The host link.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Host {
    /// Peak bandwidth, GB/s (both directions share it).
    pub gbps: f64,
    /// Loads and copy-back overlap compute.
    pub overlap: bool,
    /// Achievable fraction of peak.
    pub efficiency: f64,
}

/// A checked device description.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Device {
    /// Name shown in reports.
    pub name: String,
    /// Memory channels.
    pub channels: Channels,
    /// Engine ports.
    pub ports: Ports,
    /// Interconnect.
    pub interconnect: Interconnect,
    /// On-chip memory.
    pub onchip: OnChip,
    /// Host link.
    pub host: Host,
}

fn need<T: Clone>(v: &Option<T>, key: &str, what: &str) -> Result<T> {
    v.clone()
        .ok_or_else(|| Error::input(format!("{what}: `{key}` is missing")))
}

fn positive(v: &Option<f64>, key: &str, what: &str) -> Result<f64> {
    let x = need(v, key, what)?;
    if !(x.is_finite() && x > 0.0) {
        return Err(Error::input(format!(
            "{what}: `{key}` = {x}: must be a number above zero"
        )));
    }
    Ok(x)
}

fn efficiency(v: &Option<f64>, key: &str, what: &str) -> Result<f64> {
    let e = positive(&Some(v.unwrap_or(1.0)), key, what)?;
    if e > 1.0 {
        return Err(Error::input(format!(
            "{what}: `{key}` = {e}: an efficiency is a fraction of peak, at most 1"
        )));
    }
    Ok(e)
}

fn count(v: &Option<u32>, key: &str, what: &str) -> Result<u32> {
    match need(v, key, what)? {
        0 => Err(Error::input(format!("{what}: `{key}` must be at least 1"))),
        n => Ok(n),
    }
}

impl Device {
    /// Reads `arg`: a preset name, or a TOML file (which may name a `preset` to start from).
    pub fn load(arg: &str) -> Result<Device> {
        let path = std::path::Path::new(arg);
        if presets::text(arg).is_some() || !path.exists() {
            return Device::preset(arg);
        }
        let text = std::fs::read_to_string(path).map_err(|e| Error::read(path, e))?;
        Device::from_toml(&text, arg)
    }

    /// The built-in preset `name`; an unknown name lists the known ones.
    pub fn preset(name: &str) -> Result<Device> {
        let text = presets::text(name).ok_or_else(|| {
            Error::input(format!(
                "unknown device `{name}`: not a file, and the presets are {}",
                presets::NAMES.join(", ")
            ))
        })?;
        Device::from_toml(text, &format!("preset {name}"))
    }

    /// A description from TOML text; `what` names it in errors.
    pub fn from_toml(text: &str, what: &str) -> Result<Device> {
        let user = DeviceFile::parse(text, what)?;
        let merged = match &user.preset {
            Some(p) => {
                let base = presets::text(p).ok_or_else(|| {
                    Error::input(format!(
                        "{what}: unknown preset `{p}` (known: {})",
                        presets::NAMES.join(", ")
                    ))
                })?;
                DeviceFile::parse(base, &format!("preset {p}"))?.overlay(&user)
            }
            None => user,
        };
        Device::check(&merged, what)
    }

    fn check(f: &DeviceFile, what: &str) -> Result<Device> {
        let c = &f.channels;
        let p = &f.ports;
        let i = &f.interconnect;
        let o = &f.onchip;
        let h = &f.host;
        let interconnect = match i.kind.as_deref().unwrap_or("crossbar") {
            "crossbar" => Interconnect::Crossbar,
            "groups" => Interconnect::Groups {
                group_channels: count(&i.group_channels, "interconnect.group_channels", what)?,
                lateral_gbps: positive(&i.lateral_gbps, "interconnect.lateral_gbps", what)?,
                efficiency: efficiency(&i.efficiency, "interconnect.efficiency", what)?,
            },
            k => {
                return Err(Error::input(format!(
                    "{what}: `interconnect.kind` = `{k}`: expected crossbar or groups"
                )))
            }
        };
        Ok(Device {
            name: f.name.clone().unwrap_or_else(|| what.to_string()),
            channels: Channels {
                count: count(&c.count, "channels.count", what)?,
                capacity_mib: need(&c.capacity_mib, "channels.capacity_mib", what)?,
                gbps: positive(&c.gbps, "channels.gbps", what)?,
                granularity_bytes: count(&c.granularity_bytes, "channels.granularity_bytes", what)?,
                efficiency: efficiency(&c.efficiency, "channels.efficiency", what)?,
            },
            ports: Ports {
                count: count(&p.count, "ports.count", what)?,
                width_bits: count(&p.width_bits, "ports.width_bits", what)?,
                clock_mhz: positive(&p.clock_mhz, "ports.clock_mhz", what)?,
                shared: need(&p.shared, "ports.shared", what)?,
                efficiency: efficiency(&p.efficiency, "ports.efficiency", what)?,
            },
            interconnect,
            onchip: OnChip {
                kib_per_engine: need(&o.kib_per_engine, "onchip.kib_per_engine", what)?,
                gbps: positive(&o.gbps, "onchip.gbps", what)?,
                efficiency: efficiency(&o.efficiency, "onchip.efficiency", what)?,
            },
            host: Host {
                gbps: positive(&h.gbps, "host.gbps", what)?,
                overlap: need(&h.overlap, "host.overlap", what)?,
                efficiency: efficiency(&h.efficiency, "host.efficiency", what)?,
            },
        })
    }
}
