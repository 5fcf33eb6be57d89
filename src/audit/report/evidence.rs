//! The evidence of one results folder, read back from what the folder holds: the rows of
//! `attack_vs_bound.csv` and `manifest.json`. The HTML report, its figures and `compare`
//! are computed from this alone, so `qkd-audit report <folder>` rebuilds `report.html` from
//! the folder with the same bytes the run wrote.
//!
//! Gives the verdict vocabulary a reviewer reads first: the overall verdict
//! ([`Evidence::headline`]), the attack × rule matrix ([`Evidence::cell`]) and one
//! explanation per leaking (attack, rule) pair ([`Evidence::leaks`]), whose cause sentence
//! is the CSV's `leak_cause` column, written at run time by
//! [`super::summary::leak_cause`] (one function for the Markdown summary and the HTML).
//! Must not recompute physics: every number shown comes from the CSV.

use super::manifest::{Record, SweptKey};
use crate::audit::trial::Verdict;
use crate::error::{Error, Result};
use std::path::Path;

/// One row of `attack_vs_bound.csv`: one attack point judged under one rule.
#[derive(Clone, Debug)]
pub struct Row {
    /// Attack label.
    pub attack: String,
    /// Attack family.
    pub family: String,
    /// Entry index in the campaign, from 0.
    pub entry: usize,
    /// Point index (its random-stream key).
    pub point: u64,
    /// Attack parameters present on this row, `(name, value)`.
    pub params: Vec<(String, String)>,
    /// Swept parameter (empty if none).
    pub sweep_param: String,
    /// Swept value.
    pub sweep_value: Option<f64>,
    /// The swept setup keys' values at this point, `(key, value)` in the order of
    /// [`Evidence::setup_keys`] (empty without setup sweeps).
    pub setup: Vec<(String, f64)>,
    /// Protocol name.
    pub protocol: String,
    /// Key-length rule.
    pub rule: String,
    /// Trials at this point.
    pub trials: u64,
    /// Exact error rates (NaN where empty).
    pub qber: [f64; 3],
    /// Eve's Holevo information about a key bit, bits.
    pub holevo_z: f64,
    /// H(X|E), bits.
    pub h_x_given_e: f64,
    /// Mean key bits n.
    pub mean_key_bits: f64,
    /// Abort probability and its 95 % interval.
    pub abort: (f64, f64, f64),
    /// Mean, 5 % and 95 % quantile of the extracted key length, bits.
    pub key_length: (f64, f64, f64),
    /// Leak probability and its 95 % interval.
    pub leak: (f64, f64, f64),
    /// Mean ℓ − capacity, bits.
    pub mean_excess: f64,
    /// Mean and largest ℓ − capacity over the leaking trials, bits (NaN without a leaking
    /// trial, or in a table written before these columns).
    pub leak_excess: (f64, f64),
    /// Mean capacity, bits.
    pub mean_capacity: f64,
    /// Mean achievable bound, bits.
    pub mean_achievable: f64,
    /// Why a leaking row leaks (empty otherwise).
    pub leak_cause: String,
    /// The point's verdict.
    pub verdict: Verdict,
    /// Remarks.
    pub note: String,
}

impl Row {
    /// The largest error rate over the bases the protocol tests.
    pub fn qber_max(&self) -> f64 {
        let [z, x, y] = self.qber;
        if self.protocol == "six-state" && y.is_finite() {
            z.max(x).max(y)
        } else {
            z.max(x)
        }
    }

    /// Whether the attack acts on the pulses of the link (its information is then the
    /// fraction of key bits Eve knows exactly, and the single-photon bounds do not cover it).
    pub fn link_level(&self) -> bool {
        crate::attack::pulse::PULSE_FAMILIES.iter().any(|(name, _)| *name == self.family)
    }

    /// The point's identity across folders: attack label, every parameter value and the
    /// swept setup values.
    pub fn point_key(&self) -> String {
        let p: Vec<String> = self.params.iter().map(|(k, v)| format!("{k}={v}")).collect();
        if self.setup.is_empty() {
            format!("{} ({})", self.attack, p.join(", "))
        } else {
            let s: Vec<String> = self.setup.iter().map(|(k, v)| format!("{k}={}", crate::exact::sweep::fmt_num(*v))).collect();
            format!("{} ({}) at {}", self.attack, p.join(", "), s.join(", "))
        }
    }

    /// The swept setup values in words (`signals = 1e4, abort_qber = 0.05`), empty without.
    pub fn setup_words(&self) -> String {
        self.setup.iter().map(|(k, v)| format!("{k} = {}", short(*v))).collect::<Vec<_>>().join(", ")
    }

    /// Where the point sits on its sweep and among the swept setups, for sentences.
    pub fn at(&self) -> String {
        let setup = self.setup_words();
        match self.sweep_value {
            Some(v) if !self.sweep_param.is_empty() && setup.is_empty() => format!("{} = {}", self.sweep_param, short(v)),
            Some(v) if !self.sweep_param.is_empty() => format!("{} = {}, {setup}", self.sweep_param, short(v)),
            _ if !setup.is_empty() => setup,
            _ => format!("point {}", self.point),
        }
    }

    /// How much a leaking key exceeds what the attack leaves secret: the mean over the
    /// leaking trials, or (a table without that column) the mean over trials with a key.
    pub fn leak_excess(&self) -> f64 {
        if self.leak_excess.0.is_finite() {
            self.leak_excess.0
        } else {
            self.mean_excess
        }
    }

    /// The excess of the leaking trials as a share of the mean key, in words.
    pub fn excess_share(&self) -> String {
        let x = self.leak_excess();
        if x >= self.key_length.0 {
            "all of the mean key".into()
        } else if self.key_length.0 > 0.0 {
            format!("{} of the mean key", pct(x / self.key_length.0))
        } else {
            "-".into()
        }
    }
}

/// One attack entry of the campaign.
#[derive(Clone, Debug)]
pub struct Group {
    /// Entry index.
    pub entry: usize,
    /// Attack label.
    pub attack: String,
    /// Parameters that do not vary over the entry, `name=value;…`.
    pub fixed: String,
    /// Swept parameter (empty if none).
    pub sweep_param: String,
    /// A link-level attack.
    pub link_level: bool,
    /// File-name stem: the label made safe, with `_entry<k>` when an earlier entry has it.
    pub stem: String,
}

/// One cell of the attack × rule matrix.
#[derive(Clone, Debug)]
pub struct Cell {
    /// The worst verdict over the entry's points under the rule.
    pub verdict: Verdict,
    /// Largest mean excess over leaking points, bits.
    pub worst_excess: f64,
    /// Largest leak probability.
    pub max_leak_probability: f64,
    /// Points.
    pub points: usize,
}

/// The explanation of one leaking (attack, rule) pair.
#[derive(Clone, Debug)]
pub struct Leak<'a> {
    /// The entry.
    pub group: &'a Group,
    /// The rule.
    pub rule: String,
    /// Whether it is the system's own rule.
    pub system: bool,
    /// Leaking points, in sweep order.
    pub points: Vec<&'a Row>,
    /// The first leaking point.
    pub first: &'a Row,
    /// The point with the largest mean excess.
    pub worst: &'a Row,
}

/// The overall verdict.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Overall {
    /// The system's own rule leaks somewhere.
    SystemLeaks,
    /// Only comparison rules leak.
    ComparisonLeaks,
    /// No leak, and some key.
    NoLeak,
    /// No trial anywhere gave a key.
    NoKey,
}

/// A results folder's evidence.
#[derive(Clone, Debug)]
pub struct Evidence {
    /// The manifest.
    pub manifest: Record,
    /// The table's rows, in file order.
    pub rows: Vec<Row>,
    /// The CSV text itself (for the page's tables).
    pub csv_header: Vec<String>,
    /// Attack entries, in campaign order.
    pub groups: Vec<Group>,
    /// The swept setup keys, in the table's column order (empty without setup sweeps).
    pub setup_keys: Vec<SweptKey>,
}

/// A fraction as a percentage with one decimal.
pub fn pct(x: f64) -> String {
    if x.is_nan() {
        "-".into()
    } else {
        format!("{:.1} %", 100.0 * x)
    }
}

/// A number of bits, rounded, with thin-space grouping.
pub fn bits(x: f64) -> String {
    if !x.is_finite() {
        return "-".into();
    }
    let n = x.round() as i128;
    let digits = n.unsigned_abs().to_string();
    let mut out = String::new();
    for (i, ch) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i) % 3 == 0 {
            out.push('\u{202f}');
        }
        out.push(ch);
    }
    if n < 0 {
        format!("−{out}")
    } else {
        out
    }
}

/// A value as a reader writes it: up to 4 significant digits.
pub fn short(x: f64) -> String {
    if x.is_nan() {
        return "-".into();
    }
    if x != 0.0 && (x.abs() < 1e-3 || x.abs() >= 1e6) {
        return format!("{x:.3e}");
    }
    let s = format!("{x:.4}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// `s` made safe for a file name.
pub fn sanitize(s: &str) -> String {
    s.chars().map(|c| if c.is_ascii_alphanumeric() || c == '-' || c == '_' { c } else { '_' }).collect()
}

fn verdict_named(s: &str) -> Option<Verdict> {
    [Verdict::Aborted, Verdict::NoKey, Verdict::Secure, Verdict::Inconclusive, Verdict::Leak].into_iter().find(|v| v.name() == s)
}

/// Smallest ratio of the largest to the smallest swept value (all positive) at which a
/// setup column whose manifest does not record its sweep's scale is drawn on a
/// logarithmic axis: two decades, where a linear axis crowds the small values into its
/// first percent (common practice).
pub const INFERRED_LOG_RATIO: f64 = 100.0;

/// Largest results-folder file read back, bytes. A folder's own outputs are not capped like
/// user input (4 MiB): the largest campaign table (100 000 sweep steps per entry, several
/// entries and rules, about 700 bytes a row) runs to hundreds of megabytes; beyond this
/// size the page could not be opened in a browser either.
pub const MAX_RESULTS_FILE_BYTES: u64 = 1 << 30;

/// Reads one file of a results folder: a regular file of at most [`MAX_RESULTS_FILE_BYTES`].
pub fn read_folder_file(folder: &Path, name: &str) -> Result<String> {
    let p = folder.join(name);
    let meta = std::fs::metadata(&p).map_err(|e| Error::from(e).with_file(&p))?;
    if !meta.is_file() {
        return Err(Error::input(format!("{name} is not a regular file")).with_file(&p));
    }
    if meta.len() > MAX_RESULTS_FILE_BYTES {
        return Err(Error::input(format!("{name} is larger than {} MiB", MAX_RESULTS_FILE_BYTES >> 20)).with_file(&p));
    }
    std::fs::read_to_string(&p).map_err(|e| Error::from(e).with_file(&p))
}

/// The CSV and manifest file names of a results folder.
pub const CSV_FILE: &str = "attack_vs_bound.csv";
/// See [`CSV_FILE`].
pub const MANIFEST_FILE: &str = "manifest.json";

impl Evidence {
    /// Reads a results folder.
    pub fn load(folder: &Path) -> Result<Evidence> {
        if !folder.is_dir() {
            return Err(Error::input(format!("{}: not a results folder (no such directory)", folder.display())));
        }
        let read = |name: &str| {
            read_folder_file(folder, name)
                .map_err(|e| Error::input(format!("{}: not a campaign results folder: {}", folder.display(), e.message())))
        };
        let csv = read(CSV_FILE)?;
        let manifest = read(MANIFEST_FILE)?;
        Evidence::parse(&csv, &manifest, &folder.join(CSV_FILE).display().to_string(), &folder.join(MANIFEST_FILE).display().to_string())
    }

    /// Parses the table and the manifest; `csv_origin` and `manifest_origin` name them in errors.
    pub fn parse(csv: &str, manifest: &str, csv_origin: &str, manifest_origin: &str) -> Result<Evidence> {
        let manifest = Record::parse(manifest, manifest_origin)?;
        let mut reader = csv::Reader::from_reader(csv.as_bytes());
        let header: Vec<String> =
            reader.headers().map_err(|e| Error::input(format!("{csv_origin}: {e}")))?.iter().map(str::to_string).collect();
        let col = |name: &str| {
            header.iter().position(|h| h == name).ok_or_else(|| {
                Error::input(format!("{csv_origin}:1: column `{name}` is missing (written by another version? rerun the campaign)"))
            })
        };
        let names = [
            "attack",
            "family",
            "entry",
            "point",
            "sweep_param",
            "sweep_value",
            "protocol",
            "key_rule",
            "trials",
            "qber_z",
            "qber_x",
            "qber_y",
            "holevo_z_bits",
            "h_x_given_e_bits",
            "mean_key_bits_n",
            "abort_probability",
            "abort_ci_low",
            "abort_ci_high",
            "key_length_mean_bits",
            "key_length_q05_bits",
            "key_length_q95_bits",
            "leak_probability",
            "leak_ci_low",
            "leak_ci_high",
            "mean_excess_bits",
            "mean_capacity_bits",
            "mean_achievable_bits",
            "leak_cause",
            "verdict",
            "note",
        ];
        let idx: Vec<usize> = names.iter().map(|n| col(n)).collect::<Result<_>>()?;
        let params: Vec<(usize, String)> =
            header.iter().enumerate().filter_map(|(i, h)| h.strip_prefix("param_").map(|p| (i, p.to_string()))).collect();
        let optional = |name: &str| header.iter().position(|h| h == name);
        let leak_excess_cols = (optional("leak_excess_mean_bits"), optional("leak_excess_max_bits"));
        let setup_cols: Vec<(usize, SweptKey)> = header
            .iter()
            .enumerate()
            .filter(|(_, h)| h.starts_with("setup_"))
            .map(|(i, h)| {
                let known = manifest.setup_sweeps.iter().find(|k| k.column == *h).cloned();
                // A table whose manifest does not record its sweeps: the column's own name,
                // no unit, the scale judged from the values below.
                (i, known.unwrap_or_else(|| SweptKey { key: h["setup_".len()..].to_string(), column: h.clone(), ..SweptKey::default() }))
            })
            .collect();
        let mut rows = Vec::new();
        for (line, rec) in reader.records().enumerate() {
            let line = line + 2;
            let rec = rec.map_err(|e| Error::input(format!("{csv_origin}:{line}: {e}")))?;
            let text = |k: usize| rec.get(idx[k]).unwrap_or("").to_string();
            let number = |k: usize| -> Result<f64> {
                let t = rec.get(idx[k]).unwrap_or("");
                if t.is_empty() {
                    return Ok(f64::NAN);
                }
                t.parse::<f64>().map_err(|_| Error::input(format!("{csv_origin}:{line}: column `{}`: `{t}` is not a number", names[k])))
            };
            let integer = |k: usize| -> Result<u64> {
                let t = rec.get(idx[k]).unwrap_or("");
                t.parse::<u64>().map_err(|_| Error::input(format!("{csv_origin}:{line}: column `{}`: `{t}` is not a count", names[k])))
            };
            let verdict = verdict_named(&text(28))
                .ok_or_else(|| Error::input(format!("{csv_origin}:{line}: column `verdict`: `{}` is not a verdict", text(28))))?;
            let sweep = number(5)?;
            let mut setup = Vec::with_capacity(setup_cols.len());
            for (i, k) in &setup_cols {
                let t = rec.get(*i).unwrap_or("");
                let v = if t.is_empty() {
                    f64::NAN
                } else {
                    t.parse::<f64>()
                        .map_err(|_| Error::input(format!("{csv_origin}:{line}: column `{}`: `{t}` is not a number", k.column)))?
                };
                setup.push((k.key.clone(), v));
            }
            rows.push(Row {
                attack: text(0),
                family: text(1),
                entry: integer(2)? as usize,
                point: integer(3)?,
                params: params
                    .iter()
                    .filter_map(|(i, p)| rec.get(*i).filter(|v| !v.is_empty()).map(|v| (p.clone(), v.to_string())))
                    .collect(),
                sweep_param: text(4),
                sweep_value: if sweep.is_nan() { None } else { Some(sweep) },
                setup,
                protocol: text(6),
                rule: text(7),
                trials: integer(8)?,
                qber: [number(9)?, number(10)?, number(11)?],
                holevo_z: number(12)?,
                h_x_given_e: number(13)?,
                mean_key_bits: number(14)?,
                abort: (number(15)?, number(16)?, number(17)?),
                key_length: (number(18)?, number(19)?, number(20)?),
                leak: (number(21)?, number(22)?, number(23)?),
                mean_excess: number(24)?,
                leak_excess: {
                    let at = |i: Option<usize>| -> Result<f64> {
                        match i.and_then(|i| rec.get(i)).filter(|t| !t.is_empty()) {
                            None => Ok(f64::NAN),
                            Some(t) => t.parse::<f64>().map_err(|_| Error::input(format!("{csv_origin}:{line}: `{t}` is not a number"))),
                        }
                    };
                    (at(leak_excess_cols.0)?, at(leak_excess_cols.1)?)
                },
                mean_capacity: number(25)?,
                mean_achievable: number(26)?,
                leak_cause: text(27),
                verdict,
                note: text(29),
            });
        }
        if rows.is_empty() {
            return Err(Error::input(format!("{csv_origin}: the table has no rows")));
        }
        let mut groups: Vec<Group> = Vec::new();
        for r in &rows {
            if groups.iter().any(|g| g.entry == r.entry) {
                continue;
            }
            let varying = |k: &str| {
                rows.iter().filter(|o| o.entry == r.entry).any(|o| o.params.iter().find(|p| p.0 == k) != r.params.iter().find(|p| p.0 == k))
            };
            let fixed: Vec<String> =
                r.params.iter().filter(|(k, _)| *k != r.sweep_param && !varying(k)).map(|(k, v)| format!("{k}={v}")).collect();
            let mut stem = sanitize(&r.attack);
            if groups.iter().any(|g| g.stem == stem) {
                stem = format!("{stem}_entry{}", r.entry);
            }
            groups.push(Group {
                entry: r.entry,
                attack: r.attack.clone(),
                fixed: fixed.join(";"),
                sweep_param: r.sweep_param.clone(),
                link_level: r.link_level(),
                stem,
            });
        }
        let setup_keys = setup_cols
            .into_iter()
            .enumerate()
            .map(|(j, (_, mut k))| {
                if k.scale.is_empty() {
                    let vs: Vec<f64> = rows.iter().map(|r| r.setup[j].1).filter(|v| v.is_finite()).collect();
                    let (lo, hi) = vs.iter().fold((f64::INFINITY, 0.0_f64), |(a, b), &v| (a.min(v), b.max(v)));
                    k.scale = if lo > 0.0 && hi / lo >= INFERRED_LOG_RATIO { "log" } else { "linear" }.to_string();
                }
                k
            })
            .collect();
        Ok(Evidence { manifest, rows, csv_header: header, groups, setup_keys })
    }

    /// The values a swept setup key takes over the table, ascending.
    pub fn setup_values(&self, key: usize) -> Vec<f64> {
        let mut v: Vec<f64> = self.rows.iter().filter_map(|r| r.setup.get(key).map(|s| s.1)).filter(|x| x.is_finite()).collect();
        v.sort_by(f64::total_cmp);
        v.dedup();
        v
    }

    /// Every rule judged, the system's first.
    pub fn rules(&self) -> Vec<String> {
        if !self.manifest.rules.is_empty() {
            return self.manifest.rules.clone();
        }
        let mut out: Vec<String> = Vec::new();
        for r in &self.rows {
            if !out.contains(&r.rule) {
                out.push(r.rule.clone());
            }
        }
        out
    }

    /// The setup's own key-length rule.
    pub fn system_rule(&self) -> String {
        if self.manifest.system_rule.is_empty() {
            self.rows[0].rule.clone()
        } else {
            self.manifest.system_rule.clone()
        }
    }

    /// The protocol.
    pub fn protocol(&self) -> String {
        self.rows[0].protocol.clone()
    }

    /// The campaign name.
    pub fn campaign(&self) -> String {
        self.manifest.campaign.clone()
    }

    /// The rows of one entry under one rule, in sweep order.
    pub fn points(&self, entry: usize, rule: &str) -> Vec<&Row> {
        self.rows.iter().filter(|r| r.entry == entry && r.rule == rule).collect()
    }

    /// The rows of one entry under one rule at the entry's first swept setup (the setup of
    /// its first row), in sweep order: every row without setup sweeps. The figures against
    /// attack strength draw these, so that points of different setups that share an attack
    /// sweep value never sit on one x position as if they were one series.
    pub fn first_setup_points(&self, entry: usize, rule: &str) -> Vec<&Row> {
        let Some(first) = self.rows.iter().find(|r| r.entry == entry) else {
            return Vec::new();
        };
        let same =
            |r: &Row| r.setup.len() == first.setup.len() && r.setup.iter().zip(&first.setup).all(|(a, b)| a.1.total_cmp(&b.1).is_eq());
        self.points(entry, rule).into_iter().filter(|r| same(r)).collect()
    }

    /// The matrix cell of an entry under a rule (None if the rule did not judge it).
    pub fn cell(&self, entry: usize, rule: &str) -> Option<Cell> {
        let pts = self.points(entry, rule);
        if pts.is_empty() {
            return None;
        }
        let verdict = crate::audit::stats::point_verdict(pts.iter().map(|r| r.verdict));
        let leaking = pts.iter().filter(|r| r.verdict == Verdict::Leak);
        Some(Cell {
            verdict,
            worst_excess: leaking.clone().map(|r| r.leak_excess()).filter(|x| x.is_finite()).fold(f64::NEG_INFINITY, f64::max),
            max_leak_probability: pts.iter().map(|r| r.leak.0).filter(|x| x.is_finite()).fold(0.0, f64::max),
            points: pts.len(),
        })
    }

    /// Every leaking (entry, rule) pair, system rule first, then in campaign order.
    pub fn leaks(&self) -> Vec<Leak<'_>> {
        let system = self.system_rule();
        let mut out = Vec::new();
        for rule in self.rules() {
            for g in &self.groups {
                let points: Vec<&Row> = self.points(g.entry, &rule).into_iter().filter(|r| r.verdict == Verdict::Leak).collect();
                if let Some(first) = points.first().copied() {
                    let worst = points.iter().copied().max_by(|a, b| a.leak_excess().total_cmp(&b.leak_excess())).unwrap_or(first);
                    out.push(Leak { group: g, rule: rule.clone(), system: rule == system, points, first, worst });
                }
            }
        }
        out
    }

    /// The overall verdict.
    pub fn overall(&self) -> Overall {
        let system = self.system_rule();
        let leaks = self.rows.iter().filter(|r| r.verdict == Verdict::Leak);
        if leaks.clone().any(|r| r.rule == system) {
            Overall::SystemLeaks
        } else if leaks.count() > 0 {
            Overall::ComparisonLeaks
        } else if self.rows.iter().all(|r| matches!(r.verdict, Verdict::Aborted | Verdict::NoKey)) {
            Overall::NoKey
        } else {
            Overall::NoLeak
        }
    }

    /// The answer to "is this configuration secure, against which attacks does it fail and
    /// by how much", in one or two sentences of plain text.
    pub fn headline(&self) -> (String, String) {
        let system = self.system_rule();
        let leaks = self.leaks();
        let list = |own: bool| {
            leaks
                .iter()
                .filter(|l| l.system == own)
                .map(|l| {
                    format!(
                        "{}{} (from {}; up to {} bits beyond what the attack leaves secret, {})",
                        l.group.attack,
                        if own { String::new() } else { format!(" under `{}`", l.rule) },
                        l.first.at(),
                        bits(l.worst.leak_excess()),
                        l.worst.excess_share()
                    )
                })
                .collect::<Vec<_>>()
                .join("; ")
        };
        match self.overall() {
            Overall::SystemLeaks => (
                format!("NOT SECURE: the system's rule `{system}` leaks key"),
                format!(
                    "Keys this configuration extracts are provably not secret against: {}.{}",
                    list(true),
                    if leaks.iter().any(|l| !l.system) { format!(" Comparison rules also leak: {}.", list(false)) } else { String::new() }
                ),
            ),
            Overall::ComparisonLeaks => (
                format!("No leak found under the system's rule `{system}`"),
                format!(
                    "Within the attacks modelled, no trial extracted more key than the attack leaves secret under `{system}`. \
                     Comparison rules (not the system's) leak: {}.",
                    list(false)
                ),
            ),
            Overall::NoLeak => (
                format!("No leak found under the system's rule `{system}`"),
                format!(
                    "Within the {} attack points modelled, no trial under any rule extracted more key than the attack leaves secret.",
                    self.rows.len() / self.rules().len().max(1)
                ),
            ),
            Overall::NoKey => (
                "NO KEY: the configuration produces no key".to_string(),
                "No trial at any attack point gave a key (every point aborted or gave none), so nothing leaked and nothing usable \
                 was produced. Check the block size, the channel loss and the detectors."
                    .to_string(),
            ),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEADER: &str = "attack,family,entry,point,param_fraction,sweep_param,sweep_value,protocol,key_rule,trials,qber_z,qber_x,qber_y,\
        holevo_z_bits,h_x_given_e_bits,mean_key_bits_n,abort_probability,abort_ci_low,abort_ci_high,key_length_mean_bits,\
        key_length_q05_bits,key_length_q95_bits,leak_probability,leak_ci_low,leak_ci_high,mean_excess_bits,mean_capacity_bits,\
        mean_achievable_bits,leak_cause,verdict,note";
    const ROW: &str = "ir,intercept-resend,0,0,0.5,fraction,0.5,bb84,individual,10,0.125,0.125,,0.2,0.8,1000,0,0,0.3,500,400,600,\
        1,0.7,1,120,380,300,\"the rule assumes, wrongly\",leak,";

    fn csv(row: &str) -> String {
        format!("{HEADER}\n{row}\n")
    }

    #[test]
    fn a_row_reads_back_with_its_verdict_cause_and_empty_cells_as_missing() {
        let ev = Evidence::parse(&csv(ROW), "{}", "t.csv", "m.json").unwrap();
        let r = &ev.rows[0];
        assert_eq!(r.verdict, Verdict::Leak);
        assert_eq!(r.leak_cause, "the rule assumes, wrongly");
        assert!(r.qber[2].is_nan() && r.qber_max() == 0.125);
        assert_eq!(r.params, vec![("fraction".to_string(), "0.5".to_string())]);
        assert_eq!(ev.overall(), Overall::SystemLeaks);
        let leaks = ev.leaks();
        assert_eq!((leaks.len(), leaks[0].first.mean_excess), (1, 120.0));
        assert!(ev.headline().0.starts_with("NOT SECURE"));
        assert_eq!(r.excess_share(), "24.0 % of the mean key");
        // With the leaking trials' columns, the excess is theirs, not the mean over all trials.
        let header = HEADER.replace("mean_excess_bits,", "mean_excess_bits,leak_excess_mean_bits,leak_excess_max_bits,");
        let row = ROW.replace(",120,380,", ",-6,30,55,380,");
        let ev = Evidence::parse(&format!("{header}\n{row}\n"), "{}", "t.csv", "m.json").unwrap();
        assert_eq!((ev.rows[0].mean_excess, ev.rows[0].leak_excess), (-6.0, (30.0, 55.0)));
        assert_eq!(ev.rows[0].leak_excess(), 30.0);
        assert_eq!(ev.rows[0].excess_share(), "6.0 % of the mean key");
    }

    #[test]
    fn swept_setup_columns_read_back_with_the_manifest_s_names_or_their_own() {
        let header = HEADER.replace("sweep_value,", "sweep_value,setup_channel_length_km,");
        let row = ROW.replace(",fraction,0.5,", ",fraction,0.5,25,");
        let table = format!("{header}\n{row}\n");
        let manifest = r#"{"setup_sweeps": [{"key": "channel.length_km", "column": "setup_channel_length_km", "unit": "km",
            "scale": "linear", "from": 0, "to": 50, "steps": 3}]}"#;
        let ev = Evidence::parse(&table, manifest, "t.csv", "m.json").unwrap();
        assert_eq!(ev.rows[0].setup, vec![("channel.length_km".to_string(), 25.0)]);
        assert_eq!((ev.setup_keys[0].unit.as_str(), ev.setup_keys[0].log()), ("km", false));
        assert_eq!(ev.rows[0].at(), "fraction = 0.5, channel.length_km = 25");
        assert!(ev.rows[0].point_key().ends_with(" at channel.length_km=25"), "{}", ev.rows[0].point_key());
        // Without the manifest's record: the column's own name, no unit, the scale from the
        // values (one value: linear).
        let ev = Evidence::parse(&table, "{}", "t.csv", "m.json").unwrap();
        assert_eq!(
            (ev.setup_keys[0].key.as_str(), ev.setup_keys[0].unit.as_str(), ev.setup_keys[0].log()),
            ("channel_length_km", "", false)
        );
        let e = Evidence::parse(&table.replace(",0.5,25,", ",0.5,far,"), "{}", "t.csv", "m.json").unwrap_err().to_string();
        assert!(e.contains("t.csv:2") && e.contains("setup_channel_length_km") && e.contains("`far`"), "{e}");
        // Rows without setup columns have none, and read as before.
        assert!(Evidence::parse(&csv(ROW), "{}", "t.csv", "m.json").unwrap().setup_keys.is_empty());
    }

    #[test]
    fn bad_tables_are_refused_naming_file_line_and_column() {
        let bad = ROW.replacen(",0,0,0.3,", ",0,zero,0.3,", 1);
        let e = Evidence::parse(&csv(&bad), "{}", "t.csv", "m.json").unwrap_err().to_string();
        assert!(e.contains("t.csv:2") && e.contains("abort_ci_low") && e.contains("zero"), "{e}");
        let e = Evidence::parse(&csv(&ROW.replace(",leak,", ",lek,")), "{}", "t.csv", "m.json").unwrap_err().to_string();
        assert!(e.contains("`lek` is not a verdict"), "{e}");
        let e = Evidence::parse(&HEADER.replace(",leak_cause", ""), "{}", "t.csv", "m.json").unwrap_err().to_string();
        assert!(e.contains("column `leak_cause` is missing"), "{e}");
        let e = Evidence::parse(&format!("{HEADER}\n"), "{}", "t.csv", "m.json").unwrap_err().to_string();
        assert!(e.contains("no rows"), "{e}");
        let e = Evidence::parse(&csv(ROW), "{not json", "t.csv", "m.json").unwrap_err().to_string();
        assert!(e.contains("m.json:1:"), "{e}");
    }
}
