//! `report.html`: the evidence report, one self-contained page a reviewer can attach to an
//! evaluation. Everything is inline (CSS, SVG figures); there is no script, no font, no
//! image and no link outside the page, so it opens offline and from an e-mail attachment,
//! and prints to PDF from a browser with page breaks before the figures, the tables and the
//! provenance.
//!
//! Content, in reading order: the system under test (every setup value with its unit), the
//! overall verdict and the attack × rule matrix (the first screen answers "is this
//! configuration secure, against which attacks does it fail, by how much"), each leak
//! explained, the figures with captions, the per-point tables (with a column per swept
//! setup key, and the setup sweeps listed under the system), the provenance and the
//! caution. Every text that came from a user (names, labels, parameter values, the command
//! line, warnings) is escaped. The page is computed from [`Evidence`] alone, so
//! `qkd-audit report <folder>` rebuilds it byte for byte.

use super::evidence::{bits, pct, short, Evidence, Overall};
use super::plots::Figure;
use super::svg::esc;
use crate::audit::trial::Verdict;
use std::fmt::Write;

/// The page's style sheet: the tool's palette (see `svg::PALETTE`), A4 print rules.
pub const STYLE: &str = r#"
:root { --ink: #1a1a1a; --blue: #1d4e89; --amber: #e08e0b; --leak: #f8dcb4; --secure: #dce9f5; --band: #ececec; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", Verdana, Arial, sans-serif; color: var(--ink); margin: 0 auto; max-width: 60rem; padding: 1rem 1.2rem; line-height: 1.4; font-size: 15px; }
h1 { font-size: 1.5rem; margin: 0.2rem 0; }
h2 { font-size: 1.2rem; border-bottom: 2px solid var(--blue); padding-bottom: 0.15rem; margin-top: 1.6rem; }
h3 { font-size: 1.05rem; margin: 1.2rem 0 0.4rem; }
p.meta { color: #444; margin: 0 0 0.6rem; font-size: 0.9rem; }
nav { font-size: 0.85rem; margin-bottom: 0.5rem; }
nav a { margin-right: 0.8rem; color: var(--blue); }
.verdict { border: 3px solid var(--blue); background: var(--secure); padding: 0.6rem 0.9rem; margin: 0.8rem 0; }
.verdict.fail { border-color: #7a3b12; background: var(--leak); }
.verdict.nokey { border-color: #404040; background: var(--band); }
.verdict .headline { font-size: 1.25rem; font-weight: bold; margin: 0 0 0.3rem; }
.verdict p { margin: 0.2rem 0; }
table { border-collapse: collapse; width: 100%; margin: 0.4rem 0 0.8rem; font-size: 0.85rem; }
th, td { border: 1px solid #b5b5b5; padding: 0.2rem 0.35rem; text-align: left; vertical-align: top; overflow-wrap: anywhere; }
th { background: #eef2f7; }
thead { display: table-header-group; }
table.matrix { table-layout: fixed; font-size: 0.9rem; }
table.matrix td.leak { background: var(--leak); font-weight: bold; }
table.matrix td.secure { background: var(--secure); }
table.matrix td.inconclusive { background: var(--band); }
table.matrix td.no-key, table.matrix td.aborted { font-style: italic; }
table.matrix th.system { border-bottom: 3px solid var(--blue); }
table.points td.num, table.points th.num { text-align: right; font-variant-numeric: tabular-nums; }
tr.leak td { background: var(--leak); }
.setup-grid { display: grid; grid-template-columns: repeat(auto-fill, minmax(16rem, 1fr)); gap: 0 1rem; font-size: 0.85rem; margin: 0.3rem 0 0.6rem; }
.setup-grid div { border-bottom: 1px dotted #bbb; padding: 0.1rem 0; display: flex; justify-content: space-between; gap: 0.5rem; }
.setup-grid .k { font-family: monospace; }
.setup-grid .u { color: #555; font-size: 0.8rem; }
figure { margin: 1rem 0 1.4rem; break-inside: avoid; page-break-inside: avoid; }
figure svg { max-width: 100%; height: auto; display: block; border: 1px solid #ddd; }
figcaption { font-size: 0.88rem; margin-top: 0.3rem; }
code, .mono { font-family: "DejaVu Sans Mono", monospace; font-size: 0.85em; overflow-wrap: anywhere; }
.warn { border-left: 4px solid var(--amber); padding-left: 0.6rem; }
.caution { border: 1px solid #999; padding: 0.5rem 0.8rem; background: #f7f7f7; }
ul.leaks li { margin-bottom: 0.5rem; }
@page { size: A4; margin: 14mm; }
@media print {
  body { max-width: none; padding: 0; font-size: 10.5pt; }
  nav { display: none; }
  section.figures, section.tables, section.provenance { break-before: page; page-break-before: always; }
  tr, .verdict, ul.leaks li { break-inside: avoid; page-break-inside: avoid; }
  h2, h3 { break-after: avoid; page-break-after: avoid; }
  a { color: inherit; text-decoration: none; }
}
"#;

/// Escapes `s` and sets each `name` in backticks as code.
pub fn esc_code(s: &str) -> String {
    let mut out = String::new();
    for (i, part) in esc(s).split('`').enumerate() {
        if i % 2 == 1 {
            out.push_str("<code>");
            out.push_str(part);
            out.push_str("</code>");
        } else {
            out.push_str(part);
        }
    }
    if s.matches('`').count() % 2 == 1 {
        // An unpaired backtick: show the text as it is.
        return esc(s);
    }
    out
}

/// The system under test in one line, from the manifest's setup values.
fn system_line(ev: &Evidence) -> String {
    let get = |k: &str| ev.manifest.setup.iter().find(|v| v.key == k).map(|v| v.value.clone());
    let mut parts = Vec::new();
    if let Some(n) = get("name") {
        parts.push(format!("<b>{}</b>", esc(&n)));
    }
    parts.push(esc(&ev.protocol()));
    match get("source.kind").as_deref() {
        Some("weak-coherent") => parts.push(format!(
            "weak coherent pulses μ = {} photons per pulse, decoys {}",
            esc(&get("source.intensity").unwrap_or_default()),
            esc(&get("source.decoys").unwrap_or_default())
        )),
        Some(k) => parts.push(esc(k)),
        None => {}
    }
    if let Some(l) = get("channel.length_km") {
        parts.push(format!("{} km of fibre", esc(&l)));
    }
    if let Some(l) = get("channel.loss_db") {
        parts.push(format!("channel loss {} dB", esc(&l)));
    }
    if let Some(sig) = get("signals") {
        parts.push(format!("{} signals per block", esc(&sig)));
    }
    if let Some(a) = get("abort_qber") {
        parts.push(format!("abort above QBER {}", esc(&a)));
    }
    parts.push(format!("key-length rule <code>{}</code>", esc(&ev.system_rule())));
    format!("{} (<a href=\"#system\">every value</a>)", parts.join(", "))
}

/// The verdict's class name for the matrix and the tables.
fn verdict_class(v: Verdict) -> &'static str {
    v.name()
}

/// A UTC date and time from seconds since the Unix epoch (proleptic Gregorian calendar;
/// the civil-from-days algorithm, common practice).
pub fn utc(seconds: u64) -> String {
    let days = (seconds / 86_400) as i64;
    let rem = seconds % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!("{y:04}-{m:02}-{d:02} {:02}:{:02}:{:02} UTC", rem / 3600, rem % 3600 / 60, rem % 60)
}

/// Opens a page: doctype, head with the style sheet, and the body.
pub fn page_start(title: &str) -> String {
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <meta name=\"generator\" content=\"qkd-audit {}\">\n<title>{}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n",
        env!("CARGO_PKG_VERSION"),
        esc(title)
    )
}

/// Closes a page.
pub const PAGE_END: &str = "</body>\n</html>\n";

/// The caution every page ends with.
pub fn caution() -> String {
    "<section id=\"caution\"><h2>Caution</h2><p class=\"caution\">Simulation evidence within the modelled attack classes: \
     qkd-audit simulates the attacks in its catalogue (and those given as Kraus operators) and checks every extracted key \
     length against what each attack leaves secret and against proven bounds. It does not replace a security certification; \
     for a deployed system, defer to the applicable standards and certification schemes.</p></section>\n"
        .to_string()
}

/// Renders the figures as `<figure>` elements, numbered from `first`.
pub fn figures_html(figures: &[Figure], first: usize) -> String {
    let mut s = String::new();
    for (i, f) in figures.iter().enumerate() {
        let id = format!("fig-{}", f.file.trim_end_matches(".svg"));
        let _ = write!(
            s,
            "<figure id=\"{}\">\n{}<figcaption><b>Figure {}. {}</b> {} <span class=\"mono\">({})</span></figcaption>\n</figure>\n",
            esc(&id),
            f.svg.trim_start_matches("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n"),
            first + i,
            esc(&f.title),
            esc(&f.caption),
            esc(&f.file)
        );
    }
    s
}

/// The attack × rule matrix as an HTML table.
pub fn matrix_html(ev: &Evidence) -> String {
    let rules = ev.rules();
    let system = ev.system_rule();
    let mut s = String::from("<table class=\"matrix\" id=\"verdict-matrix\">\n<thead><tr><th>attack</th>");
    for r in &rules {
        if *r == system {
            let _ = write!(s, "<th class=\"system\"><code>{}</code><br>(the system's rule)</th>", esc(r));
        } else {
            let _ = write!(s, "<th><code>{}</code><br>(comparison)</th>", esc(r));
        }
    }
    s.push_str("</tr></thead>\n<tbody>\n");
    for g in &ev.groups {
        let _ = write!(s, "<tr><th scope=\"row\">{}", esc(&g.attack));
        if !g.fixed.is_empty() {
            let _ = write!(s, "<br><span class=\"mono\">{}</span>", esc(&g.fixed));
        }
        s.push_str("</th>");
        for r in &rules {
            match ev.cell(g.entry, r) {
                Some(c) if c.verdict == Verdict::Leak => {
                    let _ = write!(
                        s,
                        "<td class=\"leak\">LEAK<br><small>excess up to {} bits; leak probability up to {}</small></td>",
                        bits(c.worst_excess),
                        pct(c.max_leak_probability)
                    );
                }
                Some(c) => {
                    // Where the key stops (the protocol aborts, or the rule gives none).
                    let stop = ev
                        .points(g.entry, r)
                        .into_iter()
                        .find(|p| p.key_length.0.is_nan() || p.key_length.0 <= 0.0)
                        .filter(|_| !matches!(c.verdict, Verdict::NoKey | Verdict::Aborted))
                        .map(|p| format!("<br><small>no key from {}</small>", esc(&p.at())))
                        .unwrap_or_default();
                    let _ = write!(s, "<td class=\"{}\">{}{stop}</td>", verdict_class(c.verdict), c.verdict);
                }
                None => s.push_str("<td>–</td>"),
            }
        }
        s.push_str("</tr>\n");
    }
    s.push_str("</tbody>\n</table>\n");
    s.push_str(
        "<p class=\"meta\">Cell: the worst verdict over the attack's points. <b>leak</b>: in at least one trial the key exceeded what \
         the attack leaves secret (ℓ &gt; capacity + 2 log₂ n), provably not secret; <b>inconclusive</b>: between the rigorous \
         achievable bound and the capacity (covered by the rule's own proof when the rule is a proven one); <b>secure</b>: ℓ ≤ \
         achievable bound; <b>no-key</b> / <b>aborted</b>: nothing extracted.</p>\n",
    );
    s
}

/// The whole page of a campaign folder. `csv_sha256` is the hash of the table it was made
/// from, shown in the provenance.
pub fn render(ev: &Evidence, figures: &[Figure], csv_sha256: &str) -> String {
    let m = &ev.manifest;
    let name = ev.campaign();
    let mut s = page_start(&format!("qkd-audit evidence report: {name}"));
    let _ = write!(
        s,
        "<header><h1>Audit evidence: <span id=\"campaign-name\">{}</span></h1>\n<p class=\"meta\">qkd-audit {} · \
         {} trials per attack point · seed {}</p>\n<p class=\"run meta\">run started {}</p>\n<nav><a href=\"#verdict\">Verdict</a>\
         <a href=\"#leaks\">Leaks</a><a href=\"#system\">System</a><a href=\"#figures\">Figures</a><a href=\"#tables\">Tables</a><a href=\"#provenance\">Provenance</a>\
         <a href=\"#caution\">Caution</a></nav>\n<p id=\"system-line\"><b>System under test:</b> {}</p></header>\n",
        esc(&name),
        esc(&m.version),
        m.trials,
        m.seed,
        utc(m.started_unix_s),
        system_line(ev)
    );
    // Verdict and matrix.
    let (headline, detail) = ev.headline();
    let class = match ev.overall() {
        Overall::SystemLeaks => "verdict fail",
        Overall::NoKey => "verdict nokey",
        _ => "verdict",
    };
    let _ = write!(
        s,
        "<section id=\"verdict\"><h2>Verdict</h2>\n<div class=\"{class}\" id=\"overall-verdict\"><p class=\"headline\">{}</p><p>{}</p></div>\n",
        esc_code(&headline),
        esc_code(&detail)
    );
    s.push_str(&matrix_html(ev));
    s.push_str("</section>\n");
    // Leaks explained.
    let leaks = ev.leaks();
    s.push_str("<section id=\"leaks\"><h2>Leaks explained</h2>\n");
    if leaks.is_empty() {
        s.push_str("<p>No (attack, rule) pair leaks.</p>\n");
    } else {
        s.push_str("<ul class=\"leaks\">\n");
        for l in &leaks {
            let cause =
                if l.worst.leak_cause.is_empty() { "not recorded in this folder's table".to_string() } else { l.worst.leak_cause.clone() };
            let _ = writeln!(
                s,
                "<li><b>{} under <code>{}</code>{}</b>: leaks at {} of its {} points. First leaking point {}: in the leaking trials the \
                 key exceeds what the attack leaves secret by {} bits on average ({}), leak probability {}. Worst point {}: {} bits \
                 ({}). Cause: {}.</li>",
                esc(&l.group.attack),
                esc(&l.rule),
                if l.system { " (the system's rule)" } else { "" },
                l.points.len(),
                ev.points(l.group.entry, &l.rule).len(),
                esc(&l.first.at()),
                bits(l.first.leak_excess()),
                l.first.excess_share(),
                pct(l.first.leak.0),
                esc(&l.worst.at()),
                bits(l.worst.leak_excess()),
                l.worst.excess_share(),
                esc_code(&cause)
            );
        }
        s.push_str("</ul>\n");
    }
    s.push_str("</section>\n");
    // System under test.
    s.push_str("<section id=\"system\"><h2>System under test</h2>\n");
    if m.setup.is_empty() {
        s.push_str("<p class=\"warn\">This folder's manifest predates the report: the setup values are not recorded. Rerun the campaign to see them here.</p>\n");
    } else {
        s.push_str("<div class=\"setup-grid\">\n");
        for v in &m.setup {
            let _ = writeln!(
                s,
                "<div><span class=\"k\">{}</span><span><b>{}</b> <span class=\"u\">{}</span></span></div>",
                esc(&v.key),
                esc(&v.value),
                esc(&v.unit)
            );
        }
        s.push_str("</div>\n");
    }
    if !m.setup_sweeps.is_empty() {
        s.push_str("<p id=\"setup-sweeps\"><b>Setup sweeps</b> (each swept value replaces the one above; every attack point runs at every combination):</p>\n<ul>\n");
        for k in &m.setup_sweeps {
            let unit = if k.unit.is_empty() { String::new() } else { format!(" {}", esc(&k.unit)) };
            let _ = writeln!(
                s,
                "<li><code>{}</code> from {}{unit} to {}{unit}, {} {} steps</li>",
                esc(&k.key),
                short(k.from),
                short(k.to),
                k.steps,
                if k.log() { "logarithmic" } else { "linear" }
            );
        }
        s.push_str("</ul>\n");
    }
    if !m.warnings.is_empty() {
        s.push_str("<div class=\"warn\"><p><b>Warnings found before the run:</b></p><ul>\n");
        for w in &m.warnings {
            let _ = writeln!(s, "<li>{}</li>", esc(w));
        }
        s.push_str("</ul></div>\n");
    }
    s.push_str("</section>\n");
    // Figures.
    s.push_str("<section id=\"figures\" class=\"figures\"><h2>Figures</h2>\n");
    s.push_str(&figures_html(figures, 1));
    s.push_str("</section>\n");
    // Tables.
    s.push_str(&tables_html(ev));
    // Provenance.
    s.push_str(&provenance_html(ev, csv_sha256));
    s.push_str(&caution());
    s.push_str(PAGE_END);
    s
}

fn tables_html(ev: &Evidence) -> String {
    let six = ev.protocol() == "six-state";
    let mut s = String::from(
        "<section id=\"tables\" class=\"tables\"><h2>Per-point tables</h2>\n<p class=\"meta\">From <code>attack_vs_bound.csv</code> \
         (all columns there). Bits are per block; capacity and excess are means over the trials that did not abort.</p>\n",
    );
    for g in &ev.groups {
        let _ =
            writeln!(s, "<h3>{}{}</h3>", esc(&g.attack), if g.fixed.is_empty() { String::new() } else { format!(" ({})", esc(&g.fixed)) });
        let p = if g.sweep_param.is_empty() && !ev.setup_keys.is_empty() {
            String::new()
        } else if g.sweep_param.is_empty() {
            "point".to_string()
        } else {
            g.sweep_param.clone()
        };
        let first = if p.is_empty() { String::new() } else { format!("<th class=\"num\">{}</th>", esc(&p)) };
        let setup_heads: String = ev
            .setup_keys
            .iter()
            .map(|k| {
                let unit = if k.unit.is_empty() { String::new() } else { format!(", {}", esc(&k.unit)) };
                format!("<th class=\"num\"><code>{}</code>{unit}</th>", esc(&k.key))
            })
            .collect();
        let _ = write!(
            s,
            "<table class=\"points\"><thead><tr>{first}{setup_heads}<th>rule</th><th class=\"num\">QBER Z</th><th class=\"num\">QBER X</th>{}\
             <th class=\"num\">H(X|E), bits</th><th class=\"num\">abort</th><th class=\"num\">leak</th><th class=\"num\">mean key, bits</th>\
             <th class=\"num\">capacity, bits</th><th class=\"num\">excess, bits</th><th>verdict</th></tr></thead>\n<tbody>\n",
            if six { "<th class=\"num\">QBER Y</th>" } else { "" }
        );
        for rule in ev.rules() {
            for r in ev.points(g.entry, &rule) {
                let _ = writeln!(
                    s,
                    "<tr class=\"{}\">{}{}<td><code>{}</code></td><td class=\"num\">{:.4}</td><td class=\"num\">{:.4}</td>{}\
                     <td class=\"num\">{:.4}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td>\
                     <td class=\"num\">{}</td><td>{}</td></tr>",
                    verdict_class(r.verdict),
                    if p.is_empty() {
                        String::new()
                    } else {
                        format!("<td class=\"num\">{}</td>", r.sweep_value.map_or(r.point.to_string(), short))
                    },
                    r.setup.iter().map(|(_, v)| format!("<td class=\"num\">{}</td>", short(*v))).collect::<String>(),
                    esc(&r.rule),
                    r.qber[0],
                    r.qber[1],
                    if six { format!("<td class=\"num\">{:.4}</td>", r.qber[2]) } else { String::new() },
                    r.h_x_given_e,
                    pct(r.abort.0),
                    pct(r.leak.0),
                    bits(r.key_length.0),
                    bits(r.mean_capacity),
                    bits(r.mean_excess),
                    r.verdict
                );
            }
        }
        s.push_str("</tbody></table>\n");
        let mut notes: Vec<&str> = Vec::new();
        for r in ev.rows.iter().filter(|r| r.entry == g.entry && !r.note.is_empty()) {
            if !notes.contains(&r.note.as_str()) {
                notes.push(&r.note);
            }
        }
        for n in notes {
            let _ = writeln!(s, "<p class=\"meta\">Note: {}.</p>", esc(n));
        }
    }
    s.push_str("</section>\n");
    s
}

fn provenance_html(ev: &Evidence, csv_sha256: &str) -> String {
    let m = &ev.manifest;
    let mut s = String::from("<section id=\"provenance\" class=\"provenance\"><h2>Provenance</h2>\n<table class=\"provenance\"><tbody>\n");
    // Rows that differ between runs of the same inputs (the command line too: `--threads`,
    // `merge` of shards) carry the class `run` (one line each),
    // so that a comparison of two pages can leave them out (`grep -v 'class="run'`).
    let mut row = |k: &str, v: String| {
        let class = if matches!(k, "command line" | "started" | "elapsed") { " class=\"run\"" } else { "" };
        let _ = writeln!(s, "<tr{class}><th scope=\"row\">{}</th><td>{}</td></tr>", esc(k), v);
    };
    row("tool", format!("{} {}", esc(&m.tool), esc(&m.version)));
    row("command line", format!("<code>{}</code>", esc(&shell_words(&m.command_line))));
    row("campaign", esc(&m.campaign));
    row("seed", m.seed.to_string());
    row("trials per point", m.trials.to_string());
    row("sampler", esc(&m.sampler));
    row("rules judged", esc(&ev.rules().join(", ")));
    row("started", utc(m.started_unix_s));
    row("elapsed", format!("{:.3} s on {} worker thread(s)", m.elapsed_s, m.threads));
    row("table", format!("<code>attack_vs_bound.csv</code>, SHA-256 <code>{}</code> ({} rows)", esc(csv_sha256), ev.rows.len()));
    let mut inputs = String::from("<ul>");
    for i in &m.inputs {
        let _ = write!(inputs, "<li><code>{}</code><br>SHA-256 <code>{}</code></li>", esc(&i.origin), esc(&i.sha256));
    }
    inputs.push_str("</ul>");
    row("inputs", inputs);
    s.push_str("</tbody></table>\n<p class=\"meta\">The same seed and inputs give the same table, whatever the thread count. This page is \
                computed from <code>attack_vs_bound.csv</code> and <code>manifest.json</code> alone; <code>qkd-audit report &lt;folder&gt;</code> \
                rebuilds it.</p>\n</section>\n");
    s
}

/// The command line as one string a shell would read back (arguments with spaces or quotes quoted).
pub fn shell_words(args: &[String]) -> String {
    args.iter()
        .map(|a| {
            if !a.is_empty() && a.chars().all(|c| c.is_ascii_alphanumeric() || "-_./=:,@+".contains(c)) {
                a.clone()
            } else {
                format!("'{}'", a.replace('\'', "'\\''"))
            }
        })
        .collect::<Vec<_>>()
        .join(" ")
}

/// A table of CSV text as HTML (every cell escaped; numeric-looking cells right-aligned).
pub fn csv_table_html(csv_text: &str) -> crate::error::Result<String> {
    let mut reader = csv::ReaderBuilder::new().has_headers(false).from_reader(csv_text.as_bytes());
    let mut s = String::from("<table class=\"points\">\n");
    for (i, rec) in reader.records().enumerate() {
        let rec = rec.map_err(|e| crate::error::Error::input(format!("table: {e}")))?;
        if i == 0 {
            s.push_str("<thead><tr>");
            for c in rec.iter() {
                let _ = write!(s, "<th>{}</th>", esc(c));
            }
            s.push_str("</tr></thead>\n<tbody>\n");
            continue;
        }
        s.push_str("<tr>");
        for c in rec.iter() {
            let class = if c.parse::<f64>().is_ok() { " class=\"num\"" } else { "" };
            let _ = write!(s, "<td{class}>{}</td>", esc(c));
        }
        s.push_str("</tr>\n");
    }
    s.push_str("</tbody></table>\n");
    Ok(s)
}

/// The page of a hunt folder, from its `hunt.csv`: the verdict on the bound, the figure,
/// the table. Returns the figure too (it is also written as `hunt.svg`).
pub fn hunt_page(csv_text: &str, origin: &str, slack: f64) -> crate::error::Result<(Figure, String)> {
    let mut reader = csv::Reader::from_reader(csv_text.as_bytes());
    let header: Vec<String> =
        reader.headers().map_err(|e| crate::error::Error::input(format!("{origin}: {e}")))?.iter().map(str::to_string).collect();
    let col = |n: &str| {
        header.iter().position(|h| h == n).ok_or_else(|| crate::error::Error::input(format!("{origin}:1: column `{n}` is missing")))
    };
    let (q, value, bound, at, objective, unit, protocol) =
        (col("q")?, col("value")?, col("bound")?, col("bound_at_attack_qber")?, col("objective")?, col("unit")?, col("protocol")?);
    let mut points = Vec::new();
    let (mut name, mut unit_name, mut proto) = (String::new(), String::new(), String::new());
    let mut violations = Vec::new();
    for rec in reader.records() {
        let rec = rec.map_err(|e| crate::error::Error::input(format!("{origin}: {e}")))?;
        name = rec.get(objective).unwrap_or("").to_string();
        unit_name = rec.get(unit).unwrap_or("").to_string();
        proto = rec.get(protocol).unwrap_or("").to_string();
        let num = |i: usize| rec.get(i).and_then(|t| t.parse::<f64>().ok());
        if let (Some(q), Some(v), Some(b)) = (num(q), num(value), num(bound)) {
            if num(at).is_some_and(|a| v > a + slack) {
                violations.push(q);
            }
            points.push(super::plots::HuntPoint { q, value: v, bound: b });
        }
    }
    let figure = super::plots::hunt_figure(&points, &name, &unit_name);
    let mut s = page_start(&format!("qkd-audit hunt: {name} ({proto})"));
    let _ = writeln!(s, "<header><h1>Hunt for the strongest attack: {} on {}</h1></header>", esc(&name), esc(&proto));
    let (class, headline) = if violations.is_empty() {
        ("verdict", format!("No bound violated: at every target the best {} found stays at or below the proven bound.", name))
    } else {
        (
            "verdict fail",
            format!(
                "BOUND VIOLATED at Q = {}: keep the attack files as regression fixtures.",
                violations.iter().map(|q| short(*q)).collect::<Vec<_>>().join(", ")
            ),
        )
    };
    let _ = writeln!(
        s,
        "<section id=\"verdict\"><div class=\"{class}\" id=\"overall-verdict\"><p class=\"headline\">{}</p></div></section>",
        esc(&headline)
    );
    s.push_str("<section id=\"figures\"><h2>Figure</h2>\n");
    s.push_str(&figures_html(std::slice::from_ref(&figure), 1));
    s.push_str("</section>\n<section id=\"tables\"><h2>Table</h2>\n<p class=\"meta\">From <code>hunt.csv</code>.</p>\n");
    s.push_str(&csv_table_html(csv_text)?);
    s.push_str("</section>\n");
    s.push_str(&caution());
    s.push_str(PAGE_END);
    Ok((figure, s))
}

/// The page of a key-rate run: the figure, each rule's maximum distance, the table.
pub fn keyrate_page(figure: &Figure, distances_text: &str, csv_text: &str) -> crate::error::Result<String> {
    let mut s = page_start("qkd-audit key rate against distance");
    s.push_str("<header><h1>Key rate against distance</h1></header>\n<section id=\"distances\"><h2>Maximum distance per rule</h2>\n<pre>");
    s.push_str(&esc(distances_text));
    s.push_str(
        "</pre>\n<p class=\"meta\"><code>naive-single-photon</code> is not a secure rule: it counts every detection as a single photon, \
                so photon-number splitting reads the multi-photon pulses; its distance is not a secure distance.</p></section>\n",
    );
    s.push_str("<section id=\"figures\"><h2>Figure</h2>\n");
    s.push_str(&figures_html(std::slice::from_ref(figure), 1));
    s.push_str("</section>\n<section id=\"tables\" class=\"tables\"><h2>Table</h2>\n");
    s.push_str(&csv_table_html(csv_text)?);
    s.push_str("</section>\n");
    s.push_str(&caution());
    s.push_str(PAGE_END);
    Ok(s)
}

/// The page of a multi-round game hunt, from its `game.csv`: the verdict on the bound and
/// the table (one row: nothing to plot).
pub fn game_page(csv_text: &str, origin: &str, slack: f64) -> crate::error::Result<String> {
    let mut reader = csv::Reader::from_reader(csv_text.as_bytes());
    let header: Vec<String> =
        reader.headers().map_err(|e| crate::error::Error::input(format!("{origin}: {e}")))?.iter().map(str::to_string).collect();
    let col = |n: &str| {
        header.iter().position(|h| h == n).ok_or_else(|| crate::error::Error::input(format!("{origin}:1: column `{n}` is missing")))
    };
    let (value, bound, rounds) = (col("value_probability")?, col("bound_probability")?, col("rounds")?);
    let mut violated = false;
    let mut n = String::new();
    for rec in reader.records() {
        let rec = rec.map_err(|e| crate::error::Error::input(format!("{origin}: {e}")))?;
        let num = |i: usize| rec.get(i).and_then(|t| t.parse::<f64>().ok()).unwrap_or(f64::NAN);
        violated |= num(value) > num(bound) + slack;
        n = rec.get(rounds).unwrap_or("").to_string();
    }
    let mut s = page_start(&format!("qkd-audit guessing-game hunt: {n} round(s)"));
    let _ = writeln!(s, "<header><h1>Guessing-game hunt, {} round(s)</h1></header>", esc(&n));
    let (class, headline) = if violated {
        ("verdict fail", "BOUND VIOLATED: the best strategy found wins more often than (1/2 + 1/(2√2))ⁿ allows.")
    } else {
        ("verdict", "No bound violated: the best strategy found stays at or below (1/2 + 1/(2√2))ⁿ.")
    };
    let _ = writeln!(
        s,
        "<section id=\"verdict\"><div class=\"{class}\" id=\"overall-verdict\"><p class=\"headline\">{headline}</p></div></section>"
    );
    s.push_str("<section id=\"tables\"><h2>Table</h2>\n<p class=\"meta\">From <code>game.csv</code>; the strategy is in <code>strategy.toml</code>.</p>\n");
    s.push_str(&csv_table_html(csv_text)?);
    s.push_str("</section>\n");
    s.push_str(&caution());
    s.push_str(PAGE_END);
    Ok(s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn utc_dates_match_known_instants() {
        // 2000-03-01 00:00:00 UTC = 951868800 s; 2026-12-02 09:00:00 UTC = 1796202000 s
        // (independently: 20 789 days after 1970-01-01, times 86 400, plus 9 h).
        assert_eq!(utc(951_868_800), "2000-03-01 00:00:00 UTC");
        assert_eq!(utc(0), "1970-01-01 00:00:00 UTC");
        assert_eq!(utc(1_796_202_000), "2026-12-02 09:00:00 UTC");
    }

    #[test]
    fn shell_words_quote_what_needs_it() {
        assert_eq!(shell_words(&["run".into(), "my file.toml".into(), "it's".into()]), "run 'my file.toml' 'it'\\''s'");
    }
}
