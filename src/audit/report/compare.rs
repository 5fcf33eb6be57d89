//! `qkd-audit compare A B`: two results folders side by side (before and after a
//! configuration change, or two vendors' rules): the overall verdicts, the setup values that
//! differ, leaks gained and lost, verdict changes and the key-length change per point, as
//! text, CSV, JSON or an HTML section.
//!
//! Rows are matched by point (attack label and parameter values, and the swept setup values)
//! and by rule name: a row is compared only with the row of the same rule at the same point.
//! A rule judged in one folder only (a system rule renamed or replaced, a comparison rule
//! added or dropped) gives rows "only in A" or "only in B", never a verdict change. Each row
//! says whether its rule is the system's (the setup's own `key_rule`) in each folder. A
//! "gained" leak is a matched row that leaks in B and did not in A; a leaking row only B has
//! is listed with the rows only in B.
//!
//! The setup values of the two manifests (`setup` in `manifest.json`) are compared key by
//! key; every key whose value differs, or that one folder lacks, is listed with both values,
//! and so are the run values (trials, seed, sampler, version) and the input files whose
//! SHA-256 differ (a rule file changed under the same name, a campaign's sweeps).
//!
//! The exit status asks whether B's *system* rule leaks at a point where A's system rule
//! (whatever its name) did not ([`Comparison::system_worse`]); `--fail-on-any-rule` adds
//! every new leak under the same rule.

use super::evidence::{bits, Evidence, Overall};
use super::svg::esc;
use crate::audit::trial::Verdict;
use crate::error::{Error, ErrorKind, Result};
use serde::Serialize;
use std::fmt::Write;

/// What changed at one (point, rule).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Change {
    /// B leaks where A, under the same rule at the same point, did not.
    LeakGained,
    /// A leaked where B, under the same rule at the same point, does not.
    LeakLost,
    /// The verdict changed otherwise.
    VerdictChanged,
    /// Same verdict.
    Same,
    /// Only A has this point under this rule.
    OnlyInA,
    /// Only B has this point under this rule.
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
    /// Whether the rule is this folder's system rule.
    pub system: bool,
    /// Verdict.
    pub verdict: String,
    /// Mean key length, bits.
    pub key_length_mean_bits: f64,
    /// Mean excess over the capacity, bits (over all trials: negative when most trials
    /// stay below what the attack leaves secret).
    pub mean_excess_bits: f64,
    /// Mean excess over the leaking trials only, bits (NaN without a leaking trial).
    pub leak_excess_bits: f64,
    /// Fraction of trials that leaked.
    pub leak_probability: f64,
}

/// One compared (point, rule).
#[derive(Clone, Debug, Serialize)]
pub struct Row {
    /// The point: attack label and parameter values.
    pub point: String,
    /// The rule's role: `system` (the system's rule in every folder that has the row),
    /// `comparison` (in none), `system-in-a` or `system-in-b` (the system's in that folder
    /// only).
    pub role: String,
    /// A's row.
    pub a: Option<Side>,
    /// B's row.
    pub b: Option<Side>,
    /// What changed.
    pub change: Change,
}

impl Row {
    /// The rule of the row (the same on both sides).
    pub fn rule(&self) -> &str {
        self.a.as_ref().or(self.b.as_ref()).map_or("", |s| s.rule.as_str())
    }

    /// Whether B leaks here and A showed no leak (A's row does not leak, or A has none).
    pub fn new_leak(&self) -> bool {
        let leaks = |s: &Option<Side>| s.as_ref().is_some_and(|s| s.verdict == Verdict::Leak.to_string());
        leaks(&self.b) && !leaks(&self.a)
    }
}

/// One setup key whose value differs between the two folders' manifests.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct SetupChange {
    /// The setup file's key (`signals`, `channel.length_km`).
    pub key: String,
    /// A's value, as the manifest writes it (`None`: A's setup has no such key).
    pub a: Option<String>,
    /// B's value (`None`: B's setup has no such key).
    pub b: Option<String>,
    /// Its unit (`–` for none).
    pub unit: String,
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
    /// The setup values that differ, in A's order, then B's extra keys; then the run's own
    /// values that differ (`trials`, `seed`, `sampler`, `version`) and the input files whose
    /// SHA-256 differ (`input <path>`, the first 12 hex digits), with unit `–`.
    pub setup_changes: Vec<SetupChange>,
    /// The points where B's system rule leaks and A's system rule (whatever its name) did
    /// not, or A lacks the point: these decide the exit status.
    pub system_worse: Vec<String>,
    /// Every compared row, in A's order then B's extra rows.
    pub rows: Vec<Row>,
}

fn side(r: &super::evidence::Row, system: &str) -> Side {
    Side {
        rule: r.rule.clone(),
        system: r.rule == system,
        verdict: r.verdict.to_string(),
        key_length_mean_bits: r.key_length.0,
        mean_excess_bits: r.mean_excess,
        leak_excess_bits: r.leak_excess(),
        leak_probability: r.leak.0,
    }
}

fn role(a: Option<&Side>, b: Option<&Side>) -> &'static str {
    match (a.map(|s| s.system), b.map(|s| s.system)) {
        (Some(true), Some(false)) => "system-in-a",
        (Some(false), Some(true)) => "system-in-b",
        (Some(true), _) | (_, Some(true)) => "system",
        _ => "comparison",
    }
}

fn overall_words(ev: &Evidence) -> String {
    match ev.overall() {
        Overall::SystemLeaks => format!("LEAK under the system's rule `{}`", ev.system_rule()),
        Overall::ComparisonLeaks => format!("no leak under the system's rule `{}` (comparison rules leak)", ev.system_rule()),
        Overall::NoLeak => format!("no leak under the system's rule `{}`", ev.system_rule()),
        Overall::NoKey => "no key at any point".to_string(),
    }
}

/// The setup keys whose values differ (or that one side lacks), in A's order then B's.
pub fn setup_changes(a: &[super::manifest::SetupValue], b: &[super::manifest::SetupValue]) -> Vec<SetupChange> {
    let find = |list: &[super::manifest::SetupValue], key: &str| list.iter().find(|v| v.key == key).map(|v| v.value.clone());
    let mut out: Vec<SetupChange> = a
        .iter()
        .filter_map(|va| {
            let vb = find(b, &va.key);
            (vb.as_deref() != Some(va.value.as_str())).then(|| SetupChange {
                key: va.key.clone(),
                a: Some(va.value.clone()),
                b: vb,
                unit: va.unit.clone(),
            })
        })
        .collect();
    out.extend(b.iter().filter(|vb| find(a, &vb.key).is_none()).map(|vb| SetupChange {
        key: vb.key.clone(),
        a: None,
        b: Some(vb.value.clone()),
        unit: vb.unit.clone(),
    }));
    out
}

/// The run values (`trials`, `seed`, `sampler`, `version`) and input files (by SHA-256)
/// that differ between two manifests.
pub fn run_changes(a: &super::manifest::Record, b: &super::manifest::Record) -> Vec<SetupChange> {
    let mut out = Vec::new();
    for (key, va, vb) in [
        ("trials", a.trials.to_string(), b.trials.to_string()),
        ("seed", a.seed.to_string(), b.seed.to_string()),
        ("sampler", a.sampler.clone(), b.sampler.clone()),
        ("version", a.version.clone(), b.version.clone()),
    ] {
        if va != vb {
            out.push(SetupChange { key: key.into(), a: Some(va), b: Some(vb), unit: "–".into() });
        }
    }
    // Inputs are compared by content (full SHA-256): the same file read from another working
    // directory, or under another name, is no change. A file of A whose content B lacks is
    // paired with B's file of the same path, if any.
    let has = |list: &[super::manifest::InputHash], h: &str| list.iter().any(|i| i.sha256 == h);
    let sha = |h: &str| format!("SHA-256 {h}");
    let mut paired = Vec::new();
    for ia in a.inputs.iter().filter(|ia| !has(&b.inputs, &ia.sha256)) {
        let same_path = b.inputs.iter().find(|ib| ib.origin == ia.origin && !has(&a.inputs, &ib.sha256));
        if let Some(ib) = same_path {
            paired.push(ib.origin.clone());
        }
        out.push(SetupChange {
            key: format!("input {}", ia.origin),
            a: Some(sha(&ia.sha256)),
            b: same_path.map(|ib| sha(&ib.sha256)),
            unit: "–".into(),
        });
    }
    for ib in b.inputs.iter().filter(|ib| !has(&a.inputs, &ib.sha256) && !paired.contains(&ib.origin)) {
        out.push(SetupChange { key: format!("input {}", ib.origin), a: None, b: Some(sha(&ib.sha256)), unit: "–".into() });
    }
    out
}

impl Comparison {
    /// Compares A with B. An error (exit 2) when the two share no attack point.
    pub fn new(a: &Evidence, b: &Evidence) -> Result<Comparison> {
        let (sa, sb) = (a.system_rule(), b.system_rule());
        if !a.rows.iter().any(|ra| b.rows.iter().any(|rb| rb.point_key() == ra.point_key())) {
            return Err(Error::new(
                ErrorKind::Input,
                format!(
                    "the folders share no attack point (A: campaign `{}`, B: campaign `{}`): a point is an attack with the same \
                     parameters at the same swept setup values, so a fixed setup value does not match a swept one; compare runs of \
                     the same attacks and setup sweeps",
                    a.campaign(),
                    b.campaign()
                ),
            ));
        }
        let kb: Vec<(String, &super::evidence::Row)> = b.rows.iter().map(|r| (r.point_key(), r)).collect();
        let mut rows = Vec::new();
        // Each row of B matches at most one row of A: the same point under the same rule (two
        // entries with one label and the same parameters match in order).
        let mut used = vec![false; kb.len()];
        for ra in &a.rows {
            let point = ra.point_key();
            let found = kb.iter().enumerate().position(|(i, (k, rb))| !used[i] && *k == point && rb.rule == ra.rule);
            let rb = found.map(|i| {
                used[i] = true;
                kb[i].1
            });
            let change = match rb {
                None => Change::OnlyInA,
                Some(rb) => match (ra.verdict == Verdict::Leak, rb.verdict == Verdict::Leak) {
                    (false, true) => Change::LeakGained,
                    (true, false) => Change::LeakLost,
                    _ if ra.verdict != rb.verdict => Change::VerdictChanged,
                    _ => Change::Same,
                },
            };
            let (side_a, side_b) = (side(ra, &sa), rb.map(|rb| side(rb, &sb)));
            rows.push(Row { point, role: role(Some(&side_a), side_b.as_ref()).into(), a: Some(side_a), b: side_b, change });
        }
        for (i, (point, rb)) in kb.iter().enumerate() {
            if !used[i] {
                let side_b = side(rb, &sb);
                rows.push(Row {
                    point: point.clone(),
                    role: role(None, Some(&side_b)).into(),
                    a: None,
                    b: Some(side_b),
                    change: Change::OnlyInB,
                });
            }
        }
        let leaks_system = |s: &Option<Side>| s.as_ref().is_some_and(|s| s.system && s.verdict == Verdict::Leak.to_string());
        let mut system_worse: Vec<String> = Vec::new();
        for r in rows.iter().filter(|r| leaks_system(&r.b)) {
            let a_leaks = rows.iter().any(|x| x.point == r.point && leaks_system(&x.a));
            if !a_leaks && !system_worse.contains(&r.point) {
                system_worse.push(r.point.clone());
            }
        }
        let mut changes = setup_changes(&a.manifest.setup, &b.manifest.setup);
        changes.extend(run_changes(&a.manifest, &b.manifest));
        Ok(Comparison {
            a_campaign: a.campaign(),
            b_campaign: b.campaign(),
            a_system_rule: sa,
            b_system_rule: sb,
            a_verdict: overall_words(a),
            b_verdict: overall_words(b),
            setup_changes: changes,
            system_worse,
            rows,
        })
    }

    /// Rows with a change of this kind.
    pub fn with(&self, change: Change) -> Vec<&Row> {
        self.rows.iter().filter(|r| r.change == change).collect()
    }

    /// The rows where B leaks and A showed no leak (a leak gained, or a leaking row only B
    /// has): under B's system rule, or under any rule.
    pub fn new_leaks(&self, any_rule: bool) -> Vec<&Row> {
        self.rows.iter().filter(|r| r.new_leak() && (any_rule || r.b.as_ref().is_some_and(|b| b.system))).collect()
    }

    /// The exit status's question: does B's system rule leak at a point where A's system
    /// rule did not ([`Comparison::system_worse`])? With `any_rule`, also any row where B
    /// leaks and A showed no leak under the same rule ([`Comparison::new_leaks`]).
    pub fn gained(&self, any_rule: bool) -> bool {
        !self.system_worse.is_empty() || (any_rule && !self.new_leaks(true).is_empty())
    }

    /// A row's side in words: the verdict, the mean key length, and for a leak the mean
    /// excess over what the attack leaves secret.
    fn side_words(x: &Option<Side>) -> String {
        x.as_ref().map_or("absent".to_string(), |s| {
            if s.verdict == Verdict::Leak.to_string() {
                format!(
                    "{} in {} of trials (key {} bits; the leaking trials {} bits over the secret)",
                    s.verdict,
                    super::evidence::pct(s.leak_probability),
                    bits(s.key_length_mean_bits),
                    bits(s.leak_excess_bits)
                )
            } else {
                format!("{} (key {} bits)", s.verdict, bits(s.key_length_mean_bits))
            }
        })
    }

    fn describe(r: &Row) -> String {
        format!("{} [`{}`, {}]: A {} → B {}", r.point, r.rule(), r.role, Self::side_words(&r.a), Self::side_words(&r.b))
    }

    fn value_words(v: &Option<String>) -> &str {
        v.as_deref().unwrap_or("absent")
    }

    /// Plain text for the terminal.
    pub fn text(&self) -> String {
        let mut s = String::new();
        let _ = writeln!(s, "A: {} — {}", self.a_campaign, self.a_verdict);
        let _ = writeln!(s, "B: {} — {}", self.b_campaign, self.b_verdict);
        let _ = writeln!(s, "setup, run and input values that differ (key: A → B): {}", self.setup_changes.len());
        for c in &self.setup_changes {
            let _ = writeln!(s, "  {}: {} → {} ({})", c.key, Self::value_words(&c.a), Self::value_words(&c.b), c.unit);
        }
        let _ = writeln!(
            s,
            "points where B's system rule `{}` leaks and A's system rule `{}` did not, or A lacks the point (these decide the exit status): {}",
            self.b_system_rule,
            self.a_system_rule,
            self.system_worse.len()
        );
        for p in &self.system_worse {
            let _ = writeln!(s, "  {p}");
        }
        let b_only_leaks = self.with(Change::OnlyInB).iter().filter(|r| r.new_leak()).count();
        for (title, change) in [
            ("leaks gained (B leaks where A, under the same rule, did not)".to_string(), Change::LeakGained),
            ("leaks lost (A leaked, B does not under the same rule)".to_string(), Change::LeakLost),
            ("other verdict changes (same rule)".to_string(), Change::VerdictChanged),
            ("only in A (a point or rule B does not have)".to_string(), Change::OnlyInA),
            (format!("only in B (a point or rule A does not have; {b_only_leaks} of them leak)"), Change::OnlyInB),
        ] {
            let rows = self.with(change);
            let _ = writeln!(s, "{title}: {}", rows.len());
            for r in rows {
                let _ = writeln!(s, "  {}", Self::describe(r));
            }
        }
        if self.rows.iter().all(|r| r.a.is_none() || r.b.is_none()) {
            let _ = writeln!(s, "no rule judges a point in both folders: the rows above cannot be compared pairwise");
        }
        let _ = writeln!(s, "key length per point (mean bits per block, A → B, change):");
        for r in self.rows.iter().filter(|r| r.a.is_some() && r.b.is_some()) {
            let (a, b) = (r.a.as_ref().expect("both"), r.b.as_ref().expect("both"));
            let _ = writeln!(
                s,
                "  {} [`{}`, {}]: {} → {} ({}{})",
                r.point,
                r.rule(),
                r.role,
                bits(a.key_length_mean_bits),
                bits(b.key_length_mean_bits),
                if b.key_length_mean_bits >= a.key_length_mean_bits { "+" } else { "" },
                bits(b.key_length_mean_bits - a.key_length_mean_bits)
            );
        }
        s
    }

    /// CSV: first one row per setup value that differs (`change` = `setup-changed`, the
    /// `setup_*` columns filled, the others empty), then one row per (point, rule) (the
    /// `setup_*` columns empty).
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
            "setup_key",
            "setup_value_a",
            "setup_value_b",
            "setup_unit",
        ])
        .map_err(io)?;
        for c in &self.setup_changes {
            let mut record = vec![String::new(), "setup".into(), "setup-changed".into()];
            record.extend(std::iter::repeat(String::new()).take(9));
            record.extend([c.key.clone(), c.a.clone().unwrap_or_default(), c.b.clone().unwrap_or_default(), c.unit.clone()]);
            w.write_record(&record).map_err(io)?;
        }
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
                String::new(),
                String::new(),
                String::new(),
                String::new(),
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
        let new_leaks = self.new_leaks(true).len();
        let lost = self.with(Change::LeakLost).len();
        let worse = self.system_worse.len();
        let headline = if worse > 0 {
            format!("B's system rule leaks at {worse} point(s) where A's system rule did not")
        } else if new_leaks > 0 {
            let under_b_system = self.new_leaks(false).len();
            if under_b_system > 0 {
                format!(
                    "B's system rule leaks at {under_b_system} point(s) where the same rule did not leak in A; A's own system rule \
                     leaked there too, so B's system verdict is no worse"
                )
            } else {
                "B's system rule gains no leak over A's, but comparison rules leak in B where they did not in A".to_string()
            }
        } else {
            "B gains no leak over A".to_string()
        };
        let _ = writeln!(
            s,
            "<div class=\"verdict{}\" id=\"comparison-verdict\"><p class=\"headline\">{}</p><p>{} leak(s) gained under the same rule, \
             {} leaking row(s) under a rule or at a point only B has, {} leak(s) lost, {} other verdict change(s).</p></div>",
            if worse > 0 { " fail" } else { "" },
            esc(&headline),
            gained,
            new_leaks - gained,
            lost,
            self.with(Change::VerdictChanged).len()
        );
        s.push_str("<h3>Setup, run and input values that differ</h3>\n");
        if self.setup_changes.is_empty() {
            s.push_str("<p>The two runs have the same setup values, run values and input files.</p>\n");
        } else {
            s.push_str("<table class=\"points\" id=\"setup-changes\"><thead><tr><th>key</th><th>A</th><th>B</th><th>unit</th></tr></thead>\n<tbody>\n");
            for c in &self.setup_changes {
                let _ = writeln!(
                    s,
                    "<tr><td><code>{}</code></td><td>{}</td><td>{}</td><td>{}</td></tr>",
                    esc(&c.key),
                    esc(Self::value_words(&c.a)),
                    esc(Self::value_words(&c.b)),
                    esc(&c.unit)
                );
            }
            s.push_str("</tbody></table>\n");
        }
        s.push_str(
            "<table class=\"points\"><thead><tr><th>point</th><th>rule</th><th>role</th><th>change</th><th>A</th><th>B</th>\
             <th class=\"num\">key length change, bits</th></tr></thead>\n<tbody>\n",
        );
        for r in &self.rows {
            let cell = |x: &Option<Side>| if x.is_none() { "–".to_string() } else { esc(&Self::side_words(x)) };
            let delta = match (&r.a, &r.b) {
                (Some(a), Some(b)) => bits(b.key_length_mean_bits - a.key_length_mean_bits),
                _ => "–".into(),
            };
            let _ = writeln!(
                s,
                "<tr class=\"{}\"><td>{}</td><td><code>{}</code></td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class=\"num\">{}</td></tr>",
                if r.new_leak() { "leak" } else { "" },
                esc(&r.point),
                esc(r.rule()),
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
