//! The evidence report: `report.html` in every results folder, its rebuild by
//! `qkd-audit report`, the redesigned figures, `compare`, and the hunt and key-rate pages.
//! Tiny campaigns (tens of trials) keep these fast.

use qkd_audit::audit::report::evidence::Evidence;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn qkd(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_qkd-audit")).args(args).current_dir(dir).env("RAYON_NUM_THREADS", "2").output().unwrap()
}

/// A small single-photon campaign judged under `RULE` (the system's) and finite-uncertainty.
const CAMPAIGN: &str = r#"
name = "NAME"
seed = 3
trials = 30
rules = ["finite-uncertainty"]
[setup]
name = "SETUP"
signals = 20000
test_fraction = 0.05
abort_qber = 0.11
key_rule = "RULE"
[[attacks]]
builtin = "phase-covariant-cloner"
steps = 3
to = 0.04
[[attacks]]
builtin = "intercept-resend"
steps = 3
"#;

/// A name a reviewer's page must show as text, never run.
const HOSTILE: &str = "lab <script>alert('x')</script> & \"co\"";

fn campaign(dir: &Path, name: &str, rule: &str) -> (PathBuf, Output) {
    let file = dir.join(format!("{name}.toml"));
    let text = CAMPAIGN.replace("NAME", name).replace("RULE", rule).replace("SETUP", &HOSTILE.replace('"', "\\\""));
    std::fs::write(&file, text).unwrap();
    let out = qkd(&["run", file.to_str().unwrap(), "-q", "--results-dir", "results"], dir);
    (dir.join("results").join(name), out)
}

fn read(p: &Path) -> String {
    std::fs::read_to_string(p).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

fn svg_files(folder: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> =
        std::fs::read_dir(folder).unwrap().map(|e| e.unwrap().path()).filter(|p| p.extension().is_some_and(|x| x == "svg")).collect();
    v.sort();
    v
}

#[test]
fn every_run_writes_a_self_contained_page_that_rebuilds_byte_for_byte() {
    let dir = tempfile::tempdir().unwrap();
    let (folder, out) = campaign(dir.path(), "leaky", "individual");
    assert_eq!(out.status.code(), Some(1), "{}", String::from_utf8_lossy(&out.stderr));
    let page = read(&folder.join("report.html"));
    // The answer first: the verdict and the matrix come before the figures.
    let verdict = page.find("id=\"overall-verdict\"").expect("verdict");
    let matrix = page.find("id=\"verdict-matrix\"").expect("matrix");
    assert!(verdict < matrix && matrix < page.find("id=\"figures\"").unwrap());
    assert!(page.contains("NOT SECURE: the system&#39;s rule <code>individual</code> leaks key"), "headline");
    // No external resource and no script: the only URL is the SVG namespace.
    let lower = page.to_lowercase();
    assert!(!lower.contains("<script"), "a script element or an unescaped name");
    for needle in [" src=", "<link", "url(", "@import", "https:"] {
        assert!(!lower.contains(needle), "external resource marker {needle}");
    }
    assert_eq!(lower.matches("http:").count(), lower.matches("http://www.w3.org/2000/svg").count());
    assert!(page.contains("lab &lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; &quot;co&quot;"), "escaped setup name");
    assert!(page.contains("@media print") && page.contains("@page { size: A4"));
    // Every figure of the folder is in the page, verbatim, and captioned.
    let svgs = svg_files(&folder);
    assert!(svgs.len() >= 5, "{svgs:?}");
    assert_eq!(page.matches("<figure ").count(), svgs.len());
    for s in &svgs {
        assert!(page.contains(read(s).as_str()), "{} not embedded", s.display());
    }
    // The system under test with units, and the provenance.
    for needle in ["abort_qber", "error rate", "signals per block", "SHA-256", "seed", "command line", "Caution"] {
        assert!(page.contains(needle), "{needle}");
    }
    // The leak's cause is the summary's sentence, carried by the CSV.
    let csv = read(&folder.join("attack_vs_bound.csv"));
    let ev = Evidence::load(&folder).unwrap();
    let leak = ev.leaks().into_iter().next().expect("a leak");
    assert!(!leak.worst.leak_cause.is_empty());
    assert!(read(&folder.join("summary.md")).contains(&leak.worst.leak_cause), "summary and CSV share the cause sentence");
    assert!(csv.lines().next().unwrap().contains(",entry,point,") && csv.contains("leak_cause"));
    // The rebuild gives the same bytes, in place, without --force (a derived file).
    std::fs::remove_file(folder.join("report.html")).unwrap();
    let rebuilt = qkd(&["report", folder.to_str().unwrap()], dir.path());
    assert_eq!(rebuilt.status.code(), Some(0), "{}", String::from_utf8_lossy(&rebuilt.stderr));
    assert!(read(&folder.join("report.html")) == page, "rebuild differs");
    let again = qkd(&["report", folder.to_str().unwrap()], dir.path());
    assert_eq!(again.status.code(), Some(0));
    // Elsewhere, an existing file is a user's: --force to replace it.
    std::fs::write(dir.path().join("mine.html"), "keep").unwrap();
    let refused = qkd(&["report", folder.to_str().unwrap(), "-o", "mine.html"], dir.path());
    assert_eq!(refused.status.code(), Some(2));
    assert_eq!(read(&dir.path().join("mine.html")), "keep");
    let forced = qkd(&["report", folder.to_str().unwrap(), "-o", "mine.html", "--force"], dir.path());
    assert_eq!(forced.status.code(), Some(0));
    assert!(read(&dir.path().join("mine.html")) == page);
    // Not a results folder: exit 2, naming it.
    let missing = qkd(&["report", "nowhere"], dir.path());
    assert_eq!(missing.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&missing.stderr).contains("nowhere"));
    std::fs::create_dir(dir.path().join("empty")).unwrap();
    assert_eq!(qkd(&["report", "empty"], dir.path()).status.code(), Some(2));
}

#[test]
fn the_page_matrix_agrees_with_the_summary() {
    let dir = tempfile::tempdir().unwrap();
    let (folder, _) = campaign(dir.path(), "m", "individual");
    let ev = Evidence::load(&folder).unwrap();
    let summary = read(&folder.join("summary.md"));
    let rules = ev.rules();
    assert_eq!(rules, ["individual", "finite-uncertainty"]);
    for g in &ev.groups {
        let line = summary.lines().find(|l| l.starts_with(&format!("| {} |", g.attack))).expect("matrix line");
        let cells: Vec<&str> = line.split(" | ").skip(1).collect();
        for (rule, cell) in rules.iter().zip(cells) {
            let v = ev.cell(g.entry, rule).unwrap().verdict;
            let md = if cell.starts_with("**LEAK**") { "leak" } else { cell.trim_end_matches(" |").trim() };
            assert_eq!(v.name(), md, "{} under {rule}", g.attack);
        }
    }
}

#[test]
fn figures_answer_one_question_each_and_show_what_the_issue_asked() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/campaigns/demo-decoy.toml"))
        .unwrap()
        .replace("trials = 200", "trials = 20");
    std::fs::write(dir.path().join("d.toml"), text).unwrap();
    let out = qkd(&["run", "d.toml", "-q"], dir.path());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let folder = dir.path().join("results/saltmarsh-quarryhill-decoy");
    // One abort/leak figure and one key-length figure per attack (all rules in each), not one per (attack, rule).
    let names: Vec<String> = svg_files(&folder).iter().map(|p| p.file_name().unwrap().to_string_lossy().into_owned()).collect();
    assert_eq!(names.len(), 7, "{names:?}");
    // Key length: the capacity and achievable bands, the first leak labelled with its excess.
    let kl = read(&folder.join("key_length_photon-number-splitting.svg"));
    assert!(kl.contains("<polygon points") && kl.contains("capacity (what the attack leaves secret)") && kl.contains("achievable bound"));
    assert!(kl.contains("first leak: +") && kl.contains("no key from"), "first leak and no-key labels");
    // Abort/leak: markers at measured points only (no connecting lines), labelled intervals.
    let al = read(&folder.join("abort_leak_photon-number-splitting.svg"));
    assert!(!al.contains("<polyline"), "no interpolation between sweep points");
    assert!(al.contains("95 % Clopper–Pearson interval") && al.contains("leak probability, naive-single-photon"));
    // Eve's information: link-level points distinct and the bound labelled for single photons.
    let eve = read(&folder.join("eve_information.svg"));
    assert!(eve.contains("single photons") && eve.contains("link-level attack: fraction of key bits Eve knows exactly"));
    assert!(eve.contains("link-level: not bounded by the curve"));
    // The tool's own palette: none of the previous default plotting palette's colours.
    for s in svg_files(&folder) {
        let t = read(&s);
        for old in ["#1F77B4", "#FF7F0E", "#D62728", "rgb(31,119,180)", "#1f77b4", "#d62728"] {
            assert!(!t.contains(old), "{}: {old}", s.display());
        }
    }
}

/// `campaign`, with each `(from, to)` text replaced in the campaign file first.
fn campaign_with(dir: &Path, name: &str, rule: &str, edits: &[(&str, &str)]) -> (PathBuf, Output) {
    let file = dir.join(format!("{name}.toml"));
    let mut text = CAMPAIGN.replace("NAME", name).replace("RULE", rule).replace("SETUP", &HOSTILE.replace('"', "\\\""));
    for (from, to) in edits {
        assert!(text.contains(from), "{from}");
        text = text.replace(from, to);
    }
    std::fs::write(&file, text).unwrap();
    let out = qkd(&["run", file.to_str().unwrap(), "-q", "--results-dir", "results"], dir);
    (dir.join("results").join(name), out)
}

/// The count at the end of the text's line that starts with `title`.
fn count(text: &str, title: &str) -> usize {
    text.lines().find(|l| l.starts_with(title)).and_then(|l| l.rsplit(": ").next()).unwrap().parse().unwrap()
}

#[test]
fn compare_reports_leaks_gained_and_lost_with_its_exit_status() {
    let dir = tempfile::tempdir().unwrap();
    // One system rule, `vendor`, in both folders (a vendor's formula before and after a
    // change): before it extracts no key, so it cannot leak; after, 90 % of the key bits,
    // more than the stronger attacks leave secret.
    for (folder, formula) in [("old", "0"), ("new", "0.9 * n")] {
        std::fs::create_dir(dir.path().join(folder)).unwrap();
        std::fs::write(dir.path().join(folder).join("vendor.toml"), format!("name = \"vendor\"\nkey_length = \"{formula}\"\n")).unwrap();
    }
    let (safe, out) = campaign_with(dir.path(), "before", "file:old/vendor.toml", &[("abort_qber = 0.11", "abort_qber = 0.1")]);
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let (leaky, out) = campaign(dir.path(), "after", "file:new/vendor.toml");
    assert_eq!(out.status.code(), Some(1), "{}", String::from_utf8_lossy(&out.stderr));
    let (a, b) = (safe.to_str().unwrap(), leaky.to_str().unwrap());
    // Gained: B leaks where A did not.
    let gained = qkd(&["compare", a, b], dir.path());
    assert_eq!(gained.status.code(), Some(1), "{}", String::from_utf8_lossy(&gained.stderr));
    let text = String::from_utf8_lossy(&gained.stdout);
    assert!(count(&text, "leaks gained") > 0 && count(&text, "leaks lost") == 0, "{text}");
    assert!(text.contains("[`vendor`, system]: A no-key (key 0 bits) → B leak in "), "{text}");
    assert!(text.contains(" bits over the secret)"), "a leak shows its excess: {text}");
    assert!(count(&text, "points where B's system rule `vendor` leaks and A's system rule `vendor` did not") > 0, "{text}");
    assert!(text.contains("  abort_qber: 0.1 → 0.11 (error rate)"), "{text}");
    // Lost: the other way round, exit 0.
    let lost = qkd(&["compare", b, a], dir.path());
    assert_eq!(lost.status.code(), Some(0));
    let text = String::from_utf8_lossy(&lost.stdout);
    assert!(count(&text, "leaks lost") > 0 && count(&text, "leaks gained") == 0, "{text}");
    // Same folder: nothing changes.
    let same = qkd(&["compare", a, a, "--csv"], dir.path());
    assert_eq!(same.status.code(), Some(0));
    let csv = String::from_utf8_lossy(&same.stdout);
    assert!(csv.starts_with("point,role,change,rule_a,rule_b,verdict_a,verdict_b,key_length_mean_a_bits"));
    assert!(csv.lines().skip(1).all(|l| l.contains(",same,")), "{csv}");
    // CSV and JSON carry the gained rows; the HTML page escapes names and is refused on overwrite without --force.
    let csv = String::from_utf8_lossy(&qkd(&["compare", a, b, "--csv"], dir.path()).stdout).into_owned();
    assert!(csv.contains(",leak-gained,"));
    let json: serde_json::Value = serde_json::from_slice(&qkd(&["compare", a, b, "--json"], dir.path()).stdout).unwrap();
    assert!(json["rows"].as_array().unwrap().iter().any(|r| r["change"] == "leak-gained"));
    assert_eq!(qkd(&["compare", a, b, "--html", "cmp.html"], dir.path()).status.code(), Some(1));
    let page = read(&dir.path().join("cmp.html"));
    assert!(page.contains("B&#39;s system rule leaks at") || page.contains("B's system rule leaks at"), "headline");
    assert!(!page.to_lowercase().contains("<script"));
    assert_eq!(qkd(&["compare", a, b, "--html", "cmp.html"], dir.path()).status.code(), Some(2));
    // Missing or unrelated folders: exit 2.
    assert_eq!(qkd(&["compare", a, "nowhere"], dir.path()).status.code(), Some(2));
    let other = dir.path().join("other.toml");
    std::fs::write(&other, "name = \"other\"\ntrials = 5\n[setup]\nsignals = 20000\n[[attacks]]\nbuiltin = \"pauli\"\nsteps = 2\n")
        .unwrap();
    assert_eq!(qkd(&["run", "other.toml", "-q"], dir.path()).status.code(), Some(0));
    let unrelated = qkd(&["compare", a, "results/other"], dir.path());
    assert_eq!(unrelated.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&unrelated.stderr).contains("share no attack point"));
}

/// The system rule replaced by one that A judged only as a comparison rule and that leaked
/// there too: no row gains a leak under its own rule, yet B's system verdict goes from no
/// leak to LEAK, and that is what the exit status and the headline report.
#[test]
fn compare_fails_when_the_system_rule_starts_to_leak_under_a_rule_a_only_compared() {
    let dir = tempfile::tempdir().unwrap();
    let (fa, out) =
        campaign_with(dir.path(), "sys-a", "finite-uncertainty", &[("rules = [\"finite-uncertainty\"]", "rules = [\"asymptotic\"]")]);
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let (fb, out) = campaign(dir.path(), "sys-b", "asymptotic");
    assert_eq!(out.status.code(), Some(1), "B's system rule must leak for this test: {}", String::from_utf8_lossy(&out.stderr));
    let (a, b) = (fa.to_str().unwrap(), fb.to_str().unwrap());
    let out = qkd(&["compare", a, b, "--html", "c.html"], dir.path());
    assert_eq!(out.status.code(), Some(1), "{}", String::from_utf8_lossy(&out.stdout));
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(count(&text, "leaks gained"), 0, "no row gains a leak under its own rule: {text}");
    assert!(count(&text, "points where B's system rule `asymptotic` leaks and A's system rule `finite-uncertainty` did not") > 0, "{text}");
    let page = read(&dir.path().join("c.html"));
    assert!(page.contains("class=\"verdict fail\"") && !page.contains("B gains no leak over A"), "headline");
    // The other way round B's system rule does not leak: exit 0.
    assert_eq!(qkd(&["compare", b, a], dir.path()).status.code(), Some(0));
}

/// A system rule renamed between two runs (the same formula under another name) is a rule
/// each folder alone has: its rows are only in A or only in B, never a verdict change; the
/// rule both judge is matched row by row; the setup values that differ are listed in every
/// output.
#[test]
fn compare_lists_setup_changes_and_keeps_renamed_rules_apart() {
    let dir = tempfile::tempdir().unwrap();
    let formula =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/rule-files/finite-uncertainty.toml")).unwrap();
    for v in ["v1", "v2"] {
        std::fs::write(dir.path().join(format!("{v}.toml")), formula.replace("finite-uncertainty-file", &format!("vendor-{v}"))).unwrap();
    }
    let (fa, out) = campaign(dir.path(), "first", "file:v1.toml");
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let (fb, out) = campaign_with(dir.path(), "second", "file:v2.toml", &[("signals = 20000", "signals = 30000")]);
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let (a, b) = (fa.to_str().unwrap(), fb.to_str().unwrap());
    let out = qkd(&["compare", a, b], dir.path());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(count(&text, "other verdict changes"), 0, "{text}");
    // The setup's signals and rule, and the inputs: each run's own campaign and rule file.
    assert_eq!(count(&text, "setup, run and input values that differ"), 2 + 4, "{text}");
    assert!(text.contains("v1.toml: SHA-256 ") && text.contains("v2.toml: absent → SHA-256 "), "{text}");
    assert!(text.contains("  signals: 20000 → 30000 (signals per block)") && text.contains("  key_rule: vendor-v1 → vendor-v2"), "{text}");
    let json: serde_json::Value = serde_json::from_slice(&qkd(&["compare", a, b, "--json"], dir.path()).stdout).unwrap();
    let rows = json["rows"].as_array().unwrap();
    let of = |rule: &str| rows.iter().filter(|r| r["a"]["rule"] == rule || r["b"]["rule"] == rule).collect::<Vec<_>>();
    assert!(!of("vendor-v1").is_empty() && of("vendor-v1").iter().all(|r| r["change"] == "only-in-a" && r["role"] == "system"));
    assert!(!of("vendor-v2").is_empty() && of("vendor-v2").iter().all(|r| r["change"] == "only-in-b" && r["role"] == "system"));
    let shared = of("finite-uncertainty");
    assert!(!shared.is_empty() && shared.iter().all(|r| r["role"] == "comparison" && r["a"].is_object() && r["b"].is_object()));
    assert_eq!(json["setup_changes"][0], serde_json::json!({"key": "signals", "a": "20000", "b": "30000", "unit": "signals per block"}));
    let csv = String::from_utf8_lossy(&qkd(&["compare", a, b, "--csv"], dir.path()).stdout).into_owned();
    let header = csv.lines().next().unwrap();
    assert!(header.ends_with(",setup_key,setup_value_a,setup_value_b,setup_unit"), "{header}");
    assert!(csv.contains("\nsetup,setup-changed,") || csv.contains("\n,setup,setup-changed,"), "{csv}");
    assert!(csv.contains(",signals,20000,30000,signals per block\n"), "{csv}");
    assert!(!csv.contains("verdict-changed"), "{csv}");
    assert_eq!(qkd(&["compare", a, b, "--html", "cmp.html"], dir.path()).status.code(), Some(0));
    let page = read(&dir.path().join("cmp.html"));
    assert!(
        page.contains("id=\"setup-changes\"") && page.contains("<td><code>signals</code></td><td>20000</td><td>30000</td>"),
        "setup table"
    );
}

#[test]
fn keyrate_and_hunt_runs_get_their_pages() {
    let dir = tempfile::tempdir().unwrap();
    let out = qkd(&["keyrate", "--steps", "21", "-o", "k.csv", "--svg", "k.svg", "--html", "k.html"], dir.path());
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let page = read(&dir.path().join("k.html"));
    let svg = read(&dir.path().join("k.svg"));
    assert!(page.contains(svg.as_str()) && page.contains("decoy-vacuum-weak") && page.contains("maximum distance per rule"));
    assert!(svg.contains("naive-single-photon (not secure under photon-number splitting)"));
    assert!(svg.contains("stroke-dasharray"), "the insecure rule is dashed");
    let hunt = qkd(&["hunt", "--objective", "holevo", "--q", "0.05", "--starts", "2", "--iters", "10", "--out-dir", "h"], dir.path());
    assert!(hunt.status.success(), "{}", String::from_utf8_lossy(&hunt.stderr));
    let page = read(&dir.path().join("h/report.html"));
    assert!(page.contains("No bound violated") && page.contains(read(&dir.path().join("h/hunt.svg")).as_str()));
    let rebuilt = qkd(&["report", "h"], dir.path());
    assert_eq!(rebuilt.status.code(), Some(0));
    assert!(read(&dir.path().join("h/report.html")) == page);
    let game = qkd(&["hunt", "--objective", "game", "--rounds", "1", "--starts", "2", "--out-dir", "g"], dir.path());
    assert!(game.status.success(), "{}", String::from_utf8_lossy(&game.stderr));
    let page = read(&dir.path().join("g/report.html"));
    assert!(page.contains("No bound violated") && page.contains("value_probability"));
    assert_eq!(qkd(&["report", "g"], dir.path()).status.code(), Some(0));
    assert!(read(&dir.path().join("g/report.html")) == page);
}

#[test]
fn the_page_depends_on_the_thread_count_only_in_its_run_lines() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("c.toml");
    std::fs::write(&file, CAMPAIGN.replace("NAME", "t").replace("RULE", "individual").replace("SETUP", "lab")).unwrap();
    let page = |threads: &str, out: &str| {
        let o = qkd(&["run", "c.toml", "-q", "--threads", threads, "--results-dir", out], dir.path());
        assert_eq!(o.status.code(), Some(1));
        // The command line differs by the arguments themselves; every other line must not.
        read(&dir.path().join(out).join("t/report.html"))
            .lines()
            .filter(|l| !l.contains("class=\"run") && !l.contains(">command line<"))
            .collect::<Vec<_>>()
            .join("\n")
    };
    assert!(page("1", "one") == page("2", "two"), "the page differs between thread counts");
}

/// A single-photon system whose block size is swept over four decades, against
/// intercept-resend at two strengths, judged under a rule without finite-size terms and
/// under finite-uncertainty.
const SIGNALS_SWEEP: &str = r#"
name = "blocks"
seed = 5
trials = 20
rules = ["finite-uncertainty"]
[setup]
key_rule = "asymptotic"
[[attacks]]
builtin = "intercept-resend"
steps = 2
from = 0.0
to = 0.1
[[setup_sweeps]]
key = "signals"
from = 1e3
to = 1e7
steps = 5
scale = "log"
"#;

#[test]
fn a_setup_sweep_gets_its_own_figure_and_columns_and_the_page_still_rebuilds_byte_for_byte() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("b.toml"), SIGNALS_SWEEP).unwrap();
    let out = qkd(&["run", "b.toml", "-q"], dir.path());
    assert!(matches!(out.status.code(), Some(0 | 1)), "{}", String::from_utf8_lossy(&out.stderr));
    let folder = dir.path().join("results/blocks");
    let names: Vec<String> = svg_files(&folder).iter().map(|p| p.file_name().unwrap().to_string_lossy().into_owned()).collect();
    assert_eq!(
        names,
        ["abort_leak_intercept-resend.svg", "eve_information.svg", "key_length_intercept-resend.svg", "setup_signals_intercept-resend.svg"]
    );
    let ev = Evidence::load(&folder).unwrap();
    assert_eq!(ev.setup_keys.len(), 1);
    assert_eq!((ev.setup_keys[0].key.as_str(), ev.setup_keys[0].log()), ("signals", true));
    assert_eq!(ev.setup_values(0), [1e3, 1e4, 1e5, 1e6, 1e7]);
    // The setup figure: a logarithmic sweep axis, one series per attack strength, both rules.
    let fig = read(&folder.join("setup_signals_intercept-resend.svg"));
    for needle in
        [">1e3<", ">1e7<", "fraction = 0<", "fraction = 0.1<", "asymptotic (system&#39;s rule)", "finite-uncertainty: leak probability"]
    {
        assert!(fig.contains(needle), "{needle}");
    }
    // Every point without key is drawn, as a cross (one more in the legend), and every
    // point's leak probability has its marker and interval.
    let no_key = ev.rows.iter().filter(|r| r.key_length.0.is_nan() || r.key_length.0 <= 0.0).count();
    assert!(no_key > 0, "the smallest blocks under finite-uncertainty give no key");
    assert_eq!(fig.matches("<path d=\"M").count(), no_key + 1);
    // The key lengths span decades: a logarithmic key axis, the crosses at its floor.
    assert!(fig.contains("at the axis floor"));
    // The figures against attack strength show the first swept setup only, and say so.
    let kl = read(&folder.join("key_length_intercept-resend.svg"));
    assert!(kl.contains("Key length against attack strength: intercept-resend") && kl.contains(" at signals = 1000"), "title");
    let page = read(&folder.join("report.html"));
    assert!(page.contains("Drawn at the first swept setup only (signals = 1000)"));
    // The page embeds and captions the setup figure, lists the sweep and shows the swept value per row.
    assert!(page.contains(fig.as_str()) && page.contains("(setup_signals_intercept-resend.svg)"));
    assert!(page.contains("How does signals change whether the key-length rules stay inside what intercept-resend leaves secret?"));
    assert!(page.contains("<code>signals</code> from 1000 signals to 1.000e7 signals, 5 logarithmic steps"), "sweep listed");
    assert!(page.contains("<th class=\"num\">fraction</th><th class=\"num\"><code>signals</code>, signals</th><th>rule</th>"));
    let tables = &page[page.find("id=\"tables\"").unwrap()..page.find("id=\"provenance\"").unwrap()];
    let table_rows = tables.matches("<tr class=").count();
    assert_eq!(table_rows, ev.rows.len(), "one table row per CSV row");
    // The page and every figure rebuild byte for byte from the table and the manifest.
    let csv = read(&folder.join("attack_vs_bound.csv"));
    let manifest = read(&folder.join("manifest.json"));
    let (figures, rebuilt) = qkd_audit::audit::report::rebuild(&csv, &manifest, "t.csv", "m.json").unwrap();
    assert!(rebuilt == page, "rebuilt page differs");
    assert_eq!(figures.len(), names.len());
    for f in &figures {
        assert!(read(&folder.join(&f.file)) == f.svg, "{} differs", f.file);
    }
    std::fs::remove_file(folder.join("report.html")).unwrap();
    assert_eq!(qkd(&["report", folder.to_str().unwrap()], dir.path()).status.code(), Some(0));
    assert!(read(&folder.join("report.html")) == page, "qkd-audit report differs");
}

#[test]
fn crossed_setup_sweeps_give_one_figure_per_key_and_attack_and_old_manifests_still_read() {
    let dir = tempfile::tempdir().unwrap();
    let text = r#"
name = "crossed"
seed = 2
trials = 5
[setup]
signals = 20000
test_fraction = 0.05
[[attacks]]
builtin = "intercept-resend"
steps = 2
to = 0.2
[[attacks]]
builtin = "phase-covariant-cloner"
[[setup_sweeps]]
key = "abort_qber"
from = 0.08
to = 0.11
steps = 2
[[setup_sweeps]]
key = "signals"
from = 2e4
to = 2e6
steps = 3
scale = "log"
"#;
    std::fs::write(dir.path().join("c.toml"), text).unwrap();
    let out = qkd(&["run", "c.toml", "-q"], dir.path());
    assert!(matches!(out.status.code(), Some(0 | 1)), "{}", String::from_utf8_lossy(&out.stderr));
    let folder = dir.path().join("results/crossed");
    let names: Vec<String> = svg_files(&folder).iter().map(|p| p.file_name().unwrap().to_string_lossy().into_owned()).collect();
    for n in [
        "setup_abort_qber_intercept-resend.svg",
        "setup_signals_intercept-resend.svg",
        "setup_abort_qber_phase-covariant-cloner.svg",
        "setup_signals_phase-covariant-cloner.svg",
    ] {
        assert!(names.contains(&n.to_string()), "{n} missing from {names:?}");
    }
    assert_eq!(names.iter().filter(|n| n.starts_with("setup_")).count(), 4, "{names:?}");
    // The abort_qber figure's series: every (fraction, signals) pair, 2 × 3 = 6, thinned to 5.
    let fig = read(&folder.join("setup_abort_qber_intercept-resend.svg"));
    assert!(fig.contains("fraction = 0, signals = 20000<") && fig.contains("fraction = 0.2, signals = 2.000e6<"), "first and last series");
    let page = read(&folder.join("report.html"));
    assert!(page.contains("Showing 5 of the 6 series, evenly spaced"));
    assert!(page.contains("One series per value of the attack&#39;s fraction and signals"));
    // A manifest that does not record the sweeps (written before the report knew them)
    // still reads: keys from the column names, the scale judged from the values.
    let csv = read(&folder.join("attack_vs_bound.csv"));
    let mut manifest: serde_json::Value = serde_json::from_str(&read(&folder.join("manifest.json"))).unwrap();
    manifest.as_object_mut().unwrap().remove("setup_sweeps").expect("the manifest records the sweeps");
    let ev = Evidence::parse(&csv, &manifest.to_string(), "t.csv", "m.json").unwrap();
    let keys: Vec<(&str, bool)> = ev.setup_keys.iter().map(|k| (k.key.as_str(), k.log())).collect();
    assert_eq!(keys, [("abort_qber", false), ("signals", true)]);
    let (figures, _) = qkd_audit::audit::report::rebuild(&csv, &manifest.to_string(), "t.csv", "m.json").unwrap();
    assert_eq!(figures.iter().filter(|f| f.file.starts_with("setup_")).count(), 4);
}
