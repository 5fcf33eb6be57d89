//! Throughput of the exact evaluator per built-in family, with and without accessible
//! information. Targets (issue: exact evaluator): ≥ 200 000 points/s on one core without
//! accessible information, ≥ 20 000 with it. Results are recorded in DEVELOPERS.md.

use criterion::{black_box, criterion_group, criterion_main, Criterion, Throughput};
use qkd_audit::attack::file::{builtin_catalogue, parse};
use qkd_audit::eval::{evaluate, EvalOptions};
use qkd_audit::protocol::Protocol;
use std::collections::BTreeMap;

fn bench_eval(c: &mut Criterion) {
    let mut group = c.benchmark_group("eval");
    group.throughput(Throughput::Elements(1));
    for (name, text) in builtin_catalogue() {
        let file = parse(text).expect("built-in entry parses");
        if file.is_link() {
            continue;
        }
        let attack = file.attack(&BTreeMap::new()).expect("built-in entry builds");
        let label = name.trim_end_matches(".toml");
        group.bench_function(format!("{label}/fast"), |b| {
            b.iter(|| evaluate(black_box(&attack), &EvalOptions::fast(Protocol::Bb84)).unwrap())
        });
        group.bench_function(format!("{label}/with-accessible"), |b| {
            b.iter(|| evaluate(black_box(&attack), &EvalOptions::full(Protocol::Bb84)).unwrap())
        });
        // Building the attack from its parameters is part of a sweep point.
        group.bench_function(format!("{label}/build+fast"), |b| {
            b.iter(|| {
                let a = file.attack(&BTreeMap::new()).unwrap();
                evaluate(black_box(&a), &EvalOptions::fast(Protocol::Bb84)).unwrap()
            })
        });
    }
    group.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(20).measurement_time(std::time::Duration::from_secs(2)).warm_up_time(std::time::Duration::from_millis(500));
    targets = bench_eval
}
criterion_main!(benches);
