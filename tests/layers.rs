//! The layer rule, enforced: a module may use only modules of its own layer or of layers
//! declared before it in `src/lib.rs` (the order of the `pub mod` lines there is the layer
//! order, and the only place it is written down), and the modules inside one layer must not
//! import each other in a cycle. Every `crate::…` path and every `super::…` path that leaves
//! its top-level module is read from every file under `src/`, unit tests included; comment
//! lines (docs and their intra-doc links) are not dependencies and are skipped.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// One offending import: `file:line: what`.
#[derive(Debug, PartialEq, Eq)]
struct Finding {
    file: String,
    line: usize,
    what: String,
}

impl std::fmt::Display for Finding {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}:{}: {}", self.file, self.line, self.what)
    }
}

/// The layer order: the `pub mod` declarations of `lib.rs`, in order.
fn layer_order(lib_rs: &str) -> Vec<String> {
    lib_rs.lines().filter_map(|l| l.trim().strip_prefix("pub mod ")).map(|rest| rest.trim_end_matches(';').trim().to_string()).collect()
}

/// The module path of a source file relative to `src/`: `audit/rules/mod.rs` is
/// `["audit", "rules"]`, `exact/eval.rs` is `["exact", "eval"]`.
fn module_path(rel: &str) -> Vec<String> {
    let mut parts: Vec<String> = rel.trim_end_matches(".rs").split('/').map(str::to_string).collect();
    if parts.last().is_some_and(|p| p == "mod") {
        parts.pop();
    }
    parts
}

/// Every module path a line names: `crate::a::b…`, and `super::…` resolved against `here`
/// (the file's module path). Identifiers only; what follows a `{` is read as one more path.
fn named_paths(line: &str, here: &[String]) -> Vec<Vec<String>> {
    let mut out = Vec::new();
    let bytes = line.as_bytes();
    let is_ident = |c: u8| c.is_ascii_alphanumeric() || c == b'_';
    let mut i = 0;
    while i < bytes.len() {
        let at_word_start = i == 0 || !is_ident(bytes[i - 1]);
        let rest = &bytes[i..];
        let (mut base, skip) = if at_word_start && rest.starts_with(b"crate::") {
            (Vec::new(), "crate::".len())
        } else if at_word_start && rest.starts_with(b"super::") {
            // `super` of a file module is its parent; repeated `super::` climbs further.
            let mut base: Vec<String> = here.to_vec();
            base.pop();
            let mut skip = "super::".len();
            while bytes[i + skip..].starts_with(b"super::") {
                base.pop();
                skip += "super::".len();
            }
            (base, skip)
        } else {
            i += 1;
            continue;
        };
        let mut j = i + skip;
        loop {
            let start = j;
            while j < bytes.len() && is_ident(bytes[j]) {
                j += 1;
            }
            if start == j {
                break;
            }
            base.push(line[start..j].to_string());
            if bytes[j..].starts_with(b"::") && j + 2 < bytes.len() && is_ident(bytes[j + 2]) {
                j += 2;
            } else {
                break;
            }
        }
        out.push(base);
        i = j.max(i + 1);
    }
    out
}

/// The module node (top-level module and, where it exists, its second level) a path names.
fn node_of(path: &[String], modules: &BTreeSet<Vec<String>>) -> Vec<String> {
    let mut node = path.iter().take(1).cloned().collect::<Vec<_>>();
    if let Some(second) = path.get(1) {
        let candidate = vec![path[0].clone(), second.clone()];
        if modules.contains(&candidate) {
            node = candidate;
        }
    }
    node
}

/// Checks every file (relative path under `src/`, text) against the layer order.
fn check(order: &[String], files: &[(String, String)]) -> Vec<Finding> {
    let layer: BTreeMap<&str, usize> = order.iter().enumerate().map(|(i, m)| (m.as_str(), i)).collect();
    let modules: BTreeSet<Vec<String>> =
        files.iter().map(|(rel, _)| module_path(rel)).filter(|p| p.len() >= 2).map(|p| p[..2].to_vec()).collect();
    let mut findings = Vec::new();
    // Edges between the second-level modules of one layer, with where each was seen.
    let mut edges: BTreeMap<(Vec<String>, Vec<String>), (String, usize)> = BTreeMap::new();
    for (rel, text) in files {
        let here = module_path(rel);
        let Some(top) = here.first() else { continue };
        let Some(&own) = layer.get(top.as_str()) else {
            if rel != "main.rs" && rel != "lib.rs" {
                findings.push(Finding {
                    file: rel.clone(),
                    line: 0,
                    what: format!("module `{top}` is not declared in lib.rs, so it has no layer"),
                });
            }
            continue;
        };
        let from = node_of(&here, &modules);
        for (n, line) in text.lines().enumerate() {
            if line.trim_start().starts_with("//") {
                continue;
            }
            for path in named_paths(line, &here) {
                let Some(target) = path.first() else { continue };
                let Some(&theirs) = layer.get(target.as_str()) else { continue };
                if theirs > own {
                    findings.push(Finding {
                        file: rel.clone(),
                        line: n + 1,
                        what: format!(
                            "`{}` (layer {theirs}, `{}`) is above `{top}` (layer {own}): upward import",
                            path.join("::"),
                            order[theirs]
                        ),
                    });
                }
                let to = node_of(&path, &modules);
                if theirs == own && to != from {
                    edges.entry((from.clone(), to)).or_insert((rel.clone(), n + 1));
                }
            }
        }
    }
    // Cycles among the modules of one layer.
    let mut graph: BTreeMap<&Vec<String>, Vec<&Vec<String>>> = BTreeMap::new();
    for (a, b) in edges.keys() {
        graph.entry(a).or_default().push(b);
    }
    let mut reported = BTreeSet::new();
    for start in graph.keys() {
        // Depth-first search for a path back to `start`.
        let mut stack = vec![(*start, vec![*start])];
        let mut seen = BTreeSet::new();
        while let Some((node, trail)) = stack.pop() {
            for &next in graph.get(node).map(Vec::as_slice).unwrap_or(&[]) {
                if next == *start {
                    let mut members: Vec<String> = trail.iter().map(|m| m.join("::")).collect();
                    members.sort();
                    if reported.insert(members.clone()) {
                        let (file, line) = edges[&(node.clone(), next.clone())].clone();
                        let cycle: Vec<String> = trail.iter().chain([&next]).map(|m| m.join("::")).collect();
                        findings.push(Finding { file, line, what: format!("import cycle: {}", cycle.join(" -> ")) });
                    }
                } else if seen.insert(next) {
                    let mut t = trail.clone();
                    t.push(next);
                    stack.push((next, t));
                }
            }
        }
    }
    findings
}

fn source_files(dir: &Path, root: &Path, out: &mut Vec<(String, String)>) {
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir).expect("src/ is readable").map(|e| e.expect("dir entry").path()).collect();
    entries.sort();
    for p in entries {
        if p.is_dir() {
            source_files(&p, root, out);
        } else if p.extension().is_some_and(|e| e == "rs") {
            let rel = p.strip_prefix(root).expect("under src").to_string_lossy().replace('\\', "/");
            out.push((rel, std::fs::read_to_string(&p).expect("source is UTF-8")));
        }
    }
}

#[test]
fn no_module_imports_upward_or_in_a_cycle() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let order = layer_order(&std::fs::read_to_string(src.join("lib.rs")).unwrap());
    assert!(order.len() >= 8, "lib.rs declares the layers: {order:?}");
    let mut files = Vec::new();
    source_files(&src, &src, &mut files);
    let findings = check(&order, &files);
    let text: Vec<String> = findings.iter().map(Finding::to_string).collect();
    assert!(findings.is_empty(), "layer rule broken (order from lib.rs: {}):\n{}", order.join(" < "), text.join("\n"));
}

#[test]
fn the_checker_refuses_an_upward_import_and_names_file_and_line() {
    let order: Vec<String> = ["numeric", "quantum", "cli"].map(String::from).to_vec();
    let files = vec![
        ("numeric/linalg.rs".to_string(), "//! docs may link [`crate::cli`]\nuse crate::quantum::state::Ket;\n".to_string()),
        ("quantum/state.rs".to_string(), "use crate::numeric::linalg::CMat;\n".to_string()),
        ("cli/mod.rs".to_string(), "use crate::quantum::state;\n".to_string()),
    ];
    let f = check(&order, &files);
    assert_eq!(f.len(), 1, "{f:?}");
    assert_eq!((f[0].file.as_str(), f[0].line), ("numeric/linalg.rs", 2));
    assert!(f[0].to_string().contains("upward import"), "{}", f[0]);
}

#[test]
fn the_checker_finds_a_cycle_inside_a_layer_and_resolves_super() {
    let order: Vec<String> = ["audit"].map(String::from).to_vec();
    let files = vec![
        ("audit/setup.rs".to_string(), "use super::rules::KeyRule;\n".to_string()),
        ("audit/rules/mod.rs".to_string(), "pub mod a;\n".to_string()),
        ("audit/rules/a.rs".to_string(), "fn f(s: &crate::audit::setup::Setup) {}\n".to_string()),
    ];
    let f = check(&order, &files);
    assert_eq!(f.len(), 1, "{f:?}");
    assert!(f[0].what.contains("import cycle") && f[0].what.contains("audit::rules") && f[0].what.contains("audit::setup"), "{}", f[0]);
}

#[test]
fn paths_are_read_from_use_lines_and_expressions() {
    let here: Vec<String> = ["exact", "eval"].map(String::from).to_vec();
    let p = named_paths("let x = crate::numeric::rng::trial_rng(1, 2, 3); use super::bounds::{a, b};", &here);
    assert_eq!(p, vec![vec!["numeric", "rng", "trial_rng"], vec!["exact", "bounds"]]);
    // `super` of a top-level file is the crate root.
    let top: Vec<String> = vec!["output".to_string()];
    assert_eq!(named_paths("use super::cli::run;", &top), vec![vec!["cli", "run"]]);
}
