//! `qkd-audit compare A B`: two results folders side by side (before and after a
//! configuration change, or two vendors' rules): the overall verdicts, leaks gained and lost,
//! verdict changes and the key-length change per point, as text, CSV, JSON or an HTML section.
//!
//! Points are matched by attack label and parameter values. Rows under each folder's own
//! system rule are matched with each other (role `system`), even when the two systems use
//! different rules; rows under comparison rules are matched by rule name. A "gained" leak is
//! a row that leaks in B where the matching row of A did not leak or did not exist.

use super::evidence::{bits, Evidence, Overall};
use super::svg::esc;
use crate::audit::trial::Verdict;
use crate::error::{Error, ErrorKind, Result};
use serde::Serialize;
use std::fmt::Write;

/// What changed at one (point, role).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Change {
    /// B leaks where A did not.
    LeakGained,
    /// A leaked where B does not.
    LeakLost,
    /// The verdict changed otherwise.
    VerdictChanged,
    /// Same verdict.
    Same,
    /// Only A has this point.
    OnlyInA,
    /// Only B has this point.
    OnlyInB,
}

impl Change {
    /// Interface name.
    pub fn name(self) -> &'static str {
        match self {
            Change::LeakGained => "leak-gained",
            Change::LeakLost => "leak-lost",
            Change::VerdictChanged => "verdict-changed",
            Change::Same => "same",
            Change::OnlyInA => "only-in-a",
            Change::OnlyInB => "only-in-b",
        }
    }
}

/// One side of a compared row.
#[derive(Clone, Debug, Serialize)]
pub struct Side {
    /// Rule.
    pub rule: String,
    /// Verdict.
    pub verdict: String,
    /// Mean key length, bits.
    pub key_length_mean_bits: f64,
    /// Mean excess over the capacity, bits.
    pub mean_excess_bits: f64,
}

/// One compared (point, role).
#[derive(Clone, Debug, Serialize)]
pub struct Row {
    /// The point: attack label and parameter values.
    pub point: String,
    /// `system` or the comparison rule's name.
    pub role: String,
    /// A's row.
    pub a: Option<Side>,
    /// B's row.
    pub b: Option<Side>,
    /// What changed.
    pub change: Change,
}

/// A comparison.
#[derive(Clone, Debug, Serialize)]
pub struct Comparison {
    /// A's campaign name.
    pub a_campaign: String,
    /// B's campaign name.
    pub b_campaign: String,
    /// A's system rule.
    pub a_system_rule: String,
    /// B's system rule.
    pub b_system_rule: String,
    /// A's overall verdict, in words.
    pub a_verdict: String,
    /// B's overall verdict, in words.
    pub b_verdict: String,
    /// Every compared row, in A's order then B's extra rows.
    pub rows: Vec<Row>,
}

fn side(r: &super::evidence::Row) -> Side {
    Side { rule: r.rule.clone(), verdict: r.verdict.to_string(), key_length_mean_bits: r.key_length.0, mean_excess_bits: r.mean_excess }
}

fn keyed(ev: &Evidence) -> Vec<((String, String), &super::evidence::Row)> {
    let system = ev.system_rule();
    ev.rows.iter().map(|r| ((r.point_key(), if r.rule == system { "system".to_string() } else { r.rule.clone() }), r)).collect()
}

fn overall_words(ev: &Evidence) -> String {
    match ev.overall() {
        Overall::SystemLeaks => format!("LEAK under the system's rule `{}`", ev.system_rule()),
        Overall::ComparisonLeaks => format!("no leak under the system's rule `{}` (comparison rules leak)", ev.system_rule()),
        Overall::NoLeak => format!("no leak under the system's rule `{}`", ev.system_rule()),
        Overall::NoKey => "no key at any point".to_string(),
    }
}

impl Comparison {
    /// Compares A with B. An error (exit 2) when the two share no attack point.
    pub fn new(a: &Evidence, b: &Evidence) -> Result<Comparison> {
        let ka = keyed(a);
        let kb = keyed(b);
        let mut rows = Vec::new();
        // Each row of B matches at most one row of A (two entries with one label and the
        // same parameters match in order).
        let mut used = vec![false; kb.len()];
        for (k, ra) in &ka {
            let found = kb.iter().enumerate().position(|(i, (kk, _))| !used[i] && kk == k);
            let rb = found.map(|i| {
                used[i] = true;
                kb[i].1
            });
            let change = match rb {
                None => Change::OnlyInA,
                Some(rb) => match (ra.verdict == Verdict::Leak, rb.verdict == Verdict::Leak) {
                    (false, true) => Change::LeakGained,
                    (true, false) => Change::LeakLost,
                    _ if ra.verdict != rb.verdict || ra.rule != rb.rule => Change::VerdictChanged,
                    _ => Change::Same,
                },
            };
            rows.push(Row { point: k.0.clone(), role: k.1.clone(), a: Some(side(ra)), b: rb.map(side), change });
        }
        if rows.iter().all(|r| r.change == Change::OnlyInA) {
            return Err(Error::new(
                ErrorKind::Input,
                format!(
                    "the folders share no attack point (A: campaign `{}`, B: campaign `{}`): compare runs of the same attacks",
                    a.campaign(),
                    b.campaign()
                ),
            ));
        }
        for (i, (k, rb)) in kb.iter().enumerate() {
            if !used[i] {
                let change = if rb.verdict == Verdict::Leak { Change::LeakGained } else { Change::OnlyInB };
                rows.push(Row { point: k.0.clone(), role: k.1.clone(), a: None, b: Some(side(rb)), change });
            }
        }
        Ok(Comparison {
            a_campaign: a.campaign(),
            b_campaign: b.campaign(),
            a_system_rule: a.system_rule(),
            b_system_rule: b.system_rule(),
            a_verdict: overall_words(a),
            b_verdict: overall_words(b),
            rows,
        })
    }

    /// Rows with a change of this kind.
    pub fn with(&self, change: Change) -> Vec<&Row> {
        self.rows.iter().filter(|r| r.change == change).collect()
    }

    /// Whether B leaks where A did not: under the system's rule, or under any rule.
    pub fn gained(&self, any_rule: bool) -> bool {
        self.with(Change::LeakGained).iter().any(|r| any_rule || r.role == "system")
    }

    fn describe(r: &Row) -> String {
        let s = |x: &Option<Side>| {
            x.as_ref().map_or("absent".to_string(), |s| format!("{} ({} bits, `{}`)", s.verdict, bits(s.key_length_mean_bits), s.rule))
        };
        format!("{} [{}]: A {} → B {}", r.point, r.role, s(&r.a), s(&r.b))
    }

    /// Plain text for the terminal.
    pub fn text(&self) -> String {
        let mut s = String::new();
        let _ = writeln!(s, "A: {} — {}", self.a_campaign, self.a_verdict);
        let _ = writeln!(s, "B: {} — {}", self.b_campaign, self.b_verdict);
        for (title, change) in [
            ("leaks gained (B leaks where A did not)", Change::LeakGained),
            ("leaks lost (A leaked, B does not)", Change::LeakLost),
            ("other changes (verdict, or the rule judging the point)", Change::VerdictChanged),
            ("only in A", Change::OnlyInA),
            ("only in B", Change::OnlyInB),
        ] {
            let rows = self.with(change);
            let _ = writeln!(s, "{title}: {}", rows.len());
            for r in rows {
                let _ = writeln!(s, "  {}", Self::describe(r));
            }
        }
        let _ = writeln!(s, "key length per point (mean bits per block, A → B, change):");
        for r in self.rows.iter().filter(|r| r.a.is_some() && r.b.is_some()) {
            let (a, b) = (r.a.as_ref().expect("both"), r.b.as_ref().expect("both"));
            let _ = writeln!(
                s,
                "  {} [{}]: {} → {} ({}{})",
                r.point,
                r.role,
                bits(a.key_length_mean_bits),
                bits(b.key_length_mean_bits),
                if b.key_length_mean_bits >= a.key_length_mean_bits { "+" } else { "" },
                bits(b.key_length_mean_bits - a.key_length_mean_bits)
            );
        }
        s
    }

    /// Tidy CSV, one row per (point, role).
    pub fn csv(&self) -> Result<String> {
        let mut w = csv::Writer::from_writer(Vec::new());
        let io = |e: csv::Error| Error::new(ErrorKind::Io, e.to_string());
        w.write_record([
            "point",
            "role",
            "change",
            "rule_a",
            "rule_b",
            "verdict_a",
            "verdict_b",
            "key_length_mean_a_bits",
            "key_length_mean_b_bits",
            "key_length_change_bits",
            "mean_excess_a_bits",
            "mean_excess_b_bits",
        ])
        .map_err(io)?;
        let n = crate::exact::sweep::fmt_num;
        for r in &self.rows {
            let get = |s: &Option<Side>, f: &dyn Fn(&Side) -> String| s.as_ref().map_or(String::new(), f);
            let delta = match (&r.a, &r.b) {
                (Some(a), Some(b)) => n(b.key_length_mean_bits - a.key_length_mean_bits),
                _ => String::new(),
            };
            w.write_record([
                r.point.clone(),
                r.role.clone(),
                r.change.name().to_string(),
                get(&r.a, &|s| s.rule.clone()),
                get(&r.b, &|s| s.rule.clone()),
                get(&r.a, &|s| s.verdict.clone()),
                get(&r.b, &|s| s.verdict.clone()),
                get(&r.a, &|s| n(s.key_length_mean_bits)),
                get(&r.b, &|s| n(s.key_length_mean_bits)),
                delta,
                get(&r.a, &|s| n(s.mean_excess_bits)),
                get(&r.b, &|s| n(s.mean_excess_bits)),
            ])
            .map_err(io)?;
        }
        Ok(String::from_utf8(w.into_inner().map_err(|e| Error::new(ErrorKind::Io, e.to_string()))?).expect("csv is UTF-8"))
    }

    /// One JSON object.
    pub fn json(&self) -> String {
        serde_json::to_string_pretty(self).expect("comparison serialises") + "\n"
    }

    /// An HTML section (escaped), for a page of its own or inside a report.
    pub fn html_section(&self) -> String {
        let mut s = String::from("<section id=\"comparison\"><h2>Comparison</h2>\n<table class=\"matrix\"><tbody>\n");
        let _ = writeln!(s, "<tr><th scope=\"row\">A</th><td>{}</td><td>{}</td></tr>", esc(&self.a_campaign), esc(&self.a_verdict));
        let _ = writeln!(s, "<tr><th scope=\"row\">B</th><td>{}</td><td>{}</td></tr>", esc(&self.b_campaign), esc(&self.b_verdict));
        s.push_str("</tbody></table>\n");
        let gained = self.with(Change::LeakGained).len();
        let lost = self.with(Change::LeakLost).len();
        let _ = writeln!(
            s,
            "<div class=\"verdict{}\" id=\"comparison-verdict\"><p class=\"headline\">{}</p><p>{} leak(s) gained, {} lost, {} other verdict change(s).</p></div>",
            if gained > 0 { " fail" } else { "" },
            if gained > 0 { "B leaks where A did not" } else { "B gains no leak over A" },
            gained,
            lost,
            self.with(Change::VerdictChanged).len()
        );
        s.push_str(
            "<table class=\"points\"><thead><tr><th>point</th><th>role</th><th>change</th><th>A</th><th>B</th>\
             <th class=\"num\">key length change, bits</th></tr></thead>\n<tbody>\n",
        );
        for r in &self.rows {
            let cell = |x: &Option<Side>| {
                x.as_ref().map_or("–".to_string(), |s| {
                    format!("{} <code>{}</code>, {} bits", esc(&s.verdict), esc(&s.rule), bits(s.key_length_mean_bits))
                })
            };
            let delta = match (&r.a, &r.b) {
                (Some(a), Some(b)) => bits(b.key_length_mean_bits - a.key_length_mean_bits),
                _ => "–".into(),
            };
            let _ = writeln!(
                s,
                "<tr class=\"{}\"><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"num\">{}</td></tr>",
                if r.change == Change::LeakGained { "leak" } else { "" },
                esc(&r.point),
                esc(&r.role),
                r.change.name(),
                cell(&r.a),
                cell(&r.b),
                delta
            );
        }
        s.push_str("</tbody></table>\n</section>\n");
        s
    }

    /// A page of its own.
    pub fn html_page(&self) -> String {
        let mut s = super::html::page_start(&format!("qkd-audit comparison: {} → {}", self.a_campaign, self.b_campaign));
        let _ = writeln!(s, "<header><h1>Comparison: {} → {}</h1></header>", esc(&self.a_campaign), esc(&self.b_campaign));
        s.push_str(&self.html_section());
        s.push_str(&super::html::caution());
        s.push_str(super::html::PAGE_END);
        s
    }
}
