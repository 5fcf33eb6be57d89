//! Throughput of user rules, on one core. Targets (issue: the system's own key-length
//! computation): a compiled rule file ≥ 10⁶ blocks/s; a trivial rule program ≥ 10⁵
//! blocks/s with batching. Results are recorded in DEVELOPERS.md.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use qkd_audit::audit::rules::formula::{FormulaRule, FINITE_UNCERTAINTY_EXAMPLE};
use qkd_audit::audit::rules::program::{ProgramRule, TrialId};
use qkd_audit::audit::rules::{BlockStats, KeyRule, RuleParams};
use std::path::PathBuf;
use std::time::Duration;

const BLOCKS: usize = 4096;

fn params() -> RuleParams {
    RuleParams { abort_qber: 0.05, ec_efficiency: 1.16, epsilon_sec: 1e-10, epsilon_cor: 1e-12, mismatch: 1.0, blinding_catch: 1.0 }
}

/// Varied blocks around 10⁶ key bits.
fn blocks() -> Vec<BlockStats> {
    (0..BLOCKS as u64)
        .map(|i| {
            let n = 1_000_000 + 37 * i;
            let k = 50_000 + 11 * i;
            let m = 50_000;
            let m_errors = 1_000 + i % 300;
            let k_errors = 1_200 + i % 500;
            BlockStats {
                signals: 3_000_000,
                n,
                k,
                m,
                e_z: m_errors as f64 / m as f64,
                e_x: k_errors as f64 / k as f64,
                m_errors,
                k_errors,
                e_y: f64::NAN,
                key_errors: n / 50,
                ..Default::default()
            }
        })
        .collect()
}

fn formula(c: &mut Criterion) {
    let rule = FormulaRule::parse(FINITE_UNCERTAINTY_EXAMPLE, "finite-uncertainty.toml").expect("the example parses");
    let blocks = blocks();
    let p = params();
    let mut group = c.benchmark_group("rule evaluation (one core)");
    group.throughput(Throughput::Elements(BLOCKS as u64));
    group.bench_function("rule file: finite-uncertainty written out", |b| {
        b.iter(|| blocks.iter().map(|o| rule.eval(o, &p).raw_bits).sum::<f64>())
    });
    group.bench_function("built-in finite-uncertainty", |b| {
        b.iter(|| blocks.iter().map(|o| KeyRule::FiniteUncertainty.length(o, &p).raw_bits).sum::<f64>())
    });
    group.finish();
}

/// The test double, built as the example `rule_double` (by `cargo test`, or here).
fn double() -> PathBuf {
    let exe = std::env::current_exe().unwrap();
    let path = exe.parent().unwrap().parent().unwrap().join("examples").join(format!("rule_double{}", std::env::consts::EXE_SUFFIX));
    if !path.is_file() {
        let cargo = option_env!("CARGO").unwrap_or("cargo");
        let status = std::process::Command::new(cargo)
            .args(["build", "--release", "--example", "rule_double"])
            .current_dir(env!("CARGO_MANIFEST_DIR"))
            .status()
            .expect("cargo runs");
        assert!(status.success());
    }
    path
}

fn program(c: &mut Criterion) {
    let dir = tempfile::tempdir().unwrap();
    let table: toml::Table =
        format!("name = \"zero\"\ncommand = [{:?}, \"--mode\", \"zero\"]\n", double().display().to_string()).parse().unwrap();
    let rule = ProgramRule::from_table(&table, "bench", dir.path(), "").expect("valid");
    let mut session = rule.start().expect("the double starts");
    let blocks = blocks();
    let p = params();
    let mut point = 0u64;
    let mut group = c.benchmark_group("rule program (trivial, batches of 4096)");
    group.throughput(Throughput::Elements(BLOCKS as u64));
    group.bench_function("round trip", |b| {
        b.iter(|| {
            point += 1;
            let batch: Vec<(TrialId, &BlockStats, &RuleParams)> =
                blocks.iter().enumerate().map(|(i, o)| (TrialId { point, trial: i as u64 }, o, &p)).collect();
            session.ask(&batch).expect("answers").len()
        })
    });
    group.finish();
    session.finish().expect("clean exit");
}

criterion_group! {
    name = benches;
    config = Criterion::default().measurement_time(Duration::from_secs(3)).warm_up_time(Duration::from_secs(1)).sample_size(10);
    targets = formula, program
}
criterion_main!(benches);
