//! Terminal tables: a small aligned-table formatter and the one ledger reporter (totals per
//! engine, per channel and per phase). Returns strings; the command line prints them.

use crate::ledger::{Ledger, Region, Totals};

/// A text table with a header row; numeric-looking cells are right-aligned.
#[derive(Debug, Default)]
pub struct TextTable {
    header: Vec<String>,
    rows: Vec<Vec<String>>,
}

impl TextTable {
    /// A table with these column titles.
    pub fn new(header: &[&str]) -> TextTable {
        TextTable {
            header: header.iter().map(|s| s.to_string()).collect(),
            rows: Vec::new(),
        }
    }

    /// Adds a row.
    pub fn row(&mut self, cells: Vec<String>) {
        self.rows.push(cells);
    }

    /// The aligned text, two spaces between columns, a rule under the header.
    pub fn render(&self) -> String {
        let n = self.header.len();
        let mut width = vec![0; n];
        for r in std::iter::once(&self.header).chain(&self.rows) {
            for (i, c) in r.iter().enumerate().take(n) {
                width[i] = width[i].max(c.chars().count());
            }
        }
        let numeric = |s: &str| {
            s.chars()
                .next()
                .is_some_and(|c| c.is_ascii_digit() || c == '-')
        };
        // A column whose first data cell is a number is right-aligned, header included.
        let right: Vec<bool> = (0..n)
            .map(|i| {
                self.rows
                    .first()
                    .and_then(|r| r.get(i))
                    .is_some_and(|c| numeric(c))
            })
            .collect();
        let line = |r: &[String]| {
            let cells: Vec<String> = r
                .iter()
                .enumerate()
                .map(|(i, c)| {
                    if right[i] {
                        format!("{c:>w$}", w = width[i])
                    } else {
                        format!("{c:<w$}", w = width[i])
                    }
                })
                .collect();
            cells.join("  ").trim_end().to_string() + "\n"
        };
        let mut s = line(&self.header);
        s.push_str(
            &(width
                .iter()
                .map(|w| "-".repeat(*w))
                .collect::<Vec<_>>()
                .join("  ")
                + "\n"),
        );
        for r in &self.rows {
            s.push_str(&line(r));
        }
        s
    }
}

/// Bytes in binary units with three significant figures (`4.00 KiB`, `1.23 GiB`).
pub fn human_bytes(b: u64) -> String {
    const UNITS: [&str; 5] = ["B", "KiB", "MiB", "GiB", "TiB"];
    let mut v = b as f64;
    let mut u = 0;
    while v >= 1024.0 && u + 1 < UNITS.len() {
        v /= 1024.0;
        u += 1;
    }
    if u == 0 {
        format!("{b} B")
    } else {
        format!("{v:.2} {}", UNITS[u])
    }
}

fn totals_table(first: &str, rows: Vec<(String, Totals)>) -> String {
    let mut t = TextTable::new(&[
        first,
        "read",
        "read words",
        "rows in",
        "written",
        "write words",
        "rows out",
    ]);
    for (label, x) in rows {
        t.row(vec![
            label,
            human_bytes(x.read.bytes),
            x.read.words.to_string(),
            x.read.rows.to_string(),
            human_bytes(x.write.bytes),
            x.write.words.to_string(),
            x.write.rows.to_string(),
        ]);
    }
    t.render()
}

/// The ledger as three tables: per engine, per channel (device memory, with other regions
/// named), and per phase.
pub fn ledger_report(ledger: &Ledger) -> String {
    let engines = ledger
        .totals_by(|k| k.engine)
        .into_iter()
        .map(|(e, t)| (format!("engine {e}"), t))
        .collect();
    let channels = ledger
        .totals_by(|k| (k.region, k.channel))
        .into_iter()
        .map(|((r, c), t)| {
            let label = match (r, c) {
                (Region::Device, Some(c)) => format!("channel {c}"),
                (r, _) => r.name().to_string(),
            };
            (label, t)
        })
        .collect();
    let phases = ledger
        .totals_by(|k| k.phase)
        .into_iter()
        .map(|(p, t)| (p.to_string(), t))
        .collect();
    format!(
        "{}\n{}\n{}",
        totals_table("engine", engines),
        totals_table("channel", channels),
        totals_table("phase", phases)
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ledger::{Direction, Key, Phase, Traffic};

    #[test]
    fn human_units() {
        assert_eq!(human_bytes(1023), "1023 B");
        assert_eq!(human_bytes(4096), "4.00 KiB");
        assert_eq!(human_bytes(3 << 30), "3.00 GiB");
    }

    #[test]
    fn ledger_report_is_pinned() {
        let mut l = Ledger::new();
        let ph = Phase::single("scan");
        l.add(
            Key::device(0, ph, 0, Direction::Read),
            Traffic {
                bytes: 4096,
                words: 64,
                rows: 1024,
            },
        );
        l.add(
            Key::device(0, ph, 0, Direction::Write),
            Traffic {
                bytes: 60,
                words: 2,
                rows: 13,
            },
        );
        l.add(
            Key::device(1, ph, 1, Direction::Read),
            Traffic {
                bytes: 4000,
                words: 63,
                rows: 1000,
            },
        );
        let r = ledger_report(&l);
        let first: Vec<&str> = r.lines().take(4).collect();
        assert_eq!(
            first,
            vec![
                "engine        read  read words  rows in  written  write words  rows out",
                "--------  --------  ----------  -------  -------  -----------  --------",
                "engine 0  4.00 KiB          64     1024     60 B            2        13",
                "engine 1  3.91 KiB          63     1000      0 B            0         0",
            ]
        );
    }
}
