//! The report as terminal text: a summary table of every output, then the details of
//! each failing or noted output (file read, diagnosis, first differences, notes).

use super::{CheckReport, Mismatch, OutputCheck, Tolerance, Verdict};
use crate::tables::TextTable;

fn verdict(o: &OutputCheck) -> String {
    match o.verdict {
        Verdict::NotChecked => "not checked (no dump)".into(),
        Verdict::Match => "match".into(),
        Verdict::Mismatch if o.differing == 0 && o.surplus.unwrap_or(0) == 0 => {
            "MISMATCH (trailing data, --strict)".into()
        }
        Verdict::Mismatch => "MISMATCH".into(),
    }
}

fn differing(o: &OutputCheck) -> String {
    match (o.verdict, o.surplus) {
        (Verdict::NotChecked, _) => "-".into(),
        (_, Some(s)) => format!("{} missing, {s} surplus", o.differing),
        (_, None) => o.differing.to_string(),
    }
}

fn place(m: &Mismatch) -> String {
    let ch = m
        .channel_word
        .map(|c| format!(", channel word 0x{c:x}"))
        .unwrap_or_default();
    format!(
        "record {} (word {}{ch}, byte {})",
        m.record, m.word, m.byte_offset
    )
}

fn details(s: &mut String, o: &OutputCheck) {
    let Some(file) = &o.device_file else { return };
    s.push_str(&format!(
        "{}: read {} (golden {})\n",
        o.output, file, o.golden_file
    ));
    if let Some(d) = &o.diagnosis {
        s.push_str(&format!("  diagnosis ({}): {}\n", d.class, d.line));
    }
    let list = |s: &mut String,
                title: &str,
                ms: &[Mismatch],
                total: u64,
                f: &dyn Fn(&Mismatch) -> String| {
        if ms.is_empty() {
            return;
        }
        s.push_str(&format!("  {title}\n"));
        for m in ms {
            s.push_str(&format!("    {}: {}\n", place(m), f(m)));
        }
        if total as usize > ms.len() {
            s.push_str(&format!("    … and {} more\n", total as usize - ms.len()));
        }
    };
    if o.surplus.is_some() {
        list(
            s,
            "missing (golden records not in the dump), in record order:",
            &o.first_mismatches,
            o.differing,
            &|m| m.expected.clone(),
        );
        list(
            s,
            "surplus (dump records not in the golden output), in record order:",
            &o.first_surplus,
            o.surplus.unwrap_or(0),
            &|m| m.found.clone(),
        );
    } else {
        list(
            s,
            "first differences:",
            &o.first_mismatches,
            o.differing,
            &|m| format!("expected {}, found {}", m.expected, m.found),
        );
    }
    for n in &o.notes {
        s.push_str(&format!("  note: {n}\n"));
    }
}

impl CheckReport {
    /// The report as terminal text.
    pub fn to_text(&self) -> String {
        let mut t = TextTable::new(&[
            "output",
            "engine",
            "channel",
            "records",
            "differing",
            "verdict",
        ]);
        let opt = |v: Option<u32>| v.map(|x| x.to_string()).unwrap_or_else(|| "-".into());
        for o in &self.outputs {
            t.row(vec![
                o.output.clone(),
                opt(o.engine),
                opt(o.channel),
                o.records.to_string(),
                differing(o),
                verdict(o),
            ]);
        }
        let mut s = t.render();
        match self.tolerance {
            Some(Tolerance::Ulps(n)) => {
                s.push_str(&format!("float outputs compared within {n} ulps\n"))
            }
            Some(Tolerance::Near { abs, rel }) => s.push_str(&format!(
                "float outputs compared within {abs:e} + {rel:e}·|golden|\n"
            )),
            None => {}
        }
        for o in &self.outputs {
            let noted = o.verdict == Verdict::Mismatch || !o.notes.is_empty();
            if noted {
                s.push('\n');
                details(&mut s, o);
            }
        }
        let count = |v: Verdict| self.outputs.iter().filter(|o| o.verdict == v).count();
        let (bad, unchecked) = (count(Verdict::Mismatch), count(Verdict::NotChecked));
        let checked = self.outputs.len() - unchecked;
        s.push('\n');
        s.push_str(&if bad > 0 {
            let names: Vec<&str> = self
                .outputs
                .iter()
                .filter(|o| o.verdict == Verdict::Mismatch)
                .map(|o| o.output.as_str())
                .collect();
            format!(
                "MISMATCH: {bad} of {checked} checked outputs differ ({})\n",
                names.join(", ")
            )
        } else if unchecked == 0 {
            format!("all {checked} outputs match\n")
        } else {
            format!("all {checked} checked outputs match; {unchecked} not checked (no dump)\n")
        });
        s
    }
}
