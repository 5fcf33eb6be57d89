//! Throughput of the exact evaluator per built-in family, with and without accessible
//! information. Targets (issue: exact evaluator): ≥ 200 000 points/s on one core without
//! accessible information, ≥ 20 000 with it. Results are recorded in DEVELOPERS.md.

use criterion::{black_box, criterion_group, criterion_main, Criterion, Throughput};
use qkd_audit::attack::file::{builtin_catalogue, parse};
use qkd_audit::exact::eval::{evaluate, ClosedForm, EvalOptions};
use qkd_audit::protocol::Protocol;
use std::collections::BTreeMap;

fn bench_eval(c: &mut Criterion) {
    let mut group = c.benchmark_group("eval");
    group.throughput(Throughput::Elements(1));
    for (name, text) in builtin_catalogue() {
        let file = parse(text).expect("built-in entry parses");
        if file.is_pulse_attack() || file.is_device_attack() {
            continue; // link attacks have no single-photon evaluation; device attacks: below
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
        // What a sweep point of a built-in family costs: its closed form, with accessible
        // information (`exact::eval::ClosedForm`, no Kraus operators).
        let fam = qkd_audit::attack::family(&attack.family).expect("a built-in family");
        let form = ClosedForm::of(fam.name(), &attack.params).expect("every built-in family has a closed form");
        group.bench_function(format!("{label}/closed-form-with-accessible"), |b| {
            b.iter(|| black_box(&form).evaluate(&attack.label, &EvalOptions::full(Protocol::Bb84)).unwrap())
        });
    }
    group.finish();
}

/// The device attacks against a flawed detector (η = 0.2, weak monitor), with accessible
/// information, as `eval` and a campaign point compute them.
fn bench_device(c: &mut Criterion) {
    use qkd_audit::attack::AnyAttack;
    use qkd_audit::exact::device::evaluate_device;
    use qkd_audit::protocol::detector::DetectorFlaws;
    let mut group = c.benchmark_group("device");
    group.throughput(Throughput::Elements(1));
    let flaws = DetectorFlaws { mismatch: 0.2, random_swap: false, blinding_catch: 0.01 };
    for (name, text) in builtin_catalogue() {
        let file = parse(text).expect("built-in entry parses");
        if !file.is_device_attack() {
            continue;
        }
        let Ok(AnyAttack::Device(attack)) = file.build(&BTreeMap::new()) else { panic!("built-in device entry builds") };
        let label = name.trim_end_matches(".toml");
        group.bench_function(format!("{label}/with-accessible"), |b| {
            b.iter(|| evaluate_device(black_box(&attack), &flaws, Protocol::Bb84, &[0.5, 0.5], &EvalOptions::full(Protocol::Bb84)).unwrap())
        });
    }
    group.finish();
}

/// The qubit-pair kernel of the accessible information on its own: a pure pair (the
/// blocks of the Pauli cloners) and a mixed pair (the entangling probe's kind).
fn bench_qubit_pair(c: &mut Criterion) {
    use qkd_audit::numeric::linalg::{c as cx, CMat};
    use qkd_audit::quantum::measures::qubit_pair::solve;
    let state = |r: [f64; 3]| {
        CMat::from_vec(
            2,
            2,
            vec![cx(0.5 * (1.0 + r[2]), 0.0), cx(0.5 * r[0], 0.5 * r[1]), cx(0.5 * r[0], -0.5 * r[1]), cx(0.5 * (1.0 - r[2]), 0.0)],
        )
    };
    let (pure0, pure1) = (state([0.6, 0.0, 0.8]), state([-0.6, 0.0, 0.8]));
    let (mixed0, mixed1) = (state([0.3, 0.1, 0.5]), state([-0.2, 0.4, 0.1]));
    let mut group = c.benchmark_group("qubit-pair");
    group.throughput(Throughput::Elements(1));
    group.bench_function("pure", |b| b.iter(|| solve(black_box([0.5, 0.5]), [&pure0, &pure1])));
    group.bench_function("mixed", |b| b.iter(|| solve(black_box([0.5, 0.5]), [&mixed0, &mixed1])));
    group.finish();
}

/// Accessible information of unstructured pairs (random full-rank states, no common
/// blocks): the multi-start search steered by the dual bound. The figures in
/// DEVELOPERS.md (open work) come from here.
fn bench_accessible_search(c: &mut Criterion) {
    use qkd_audit::quantum::measures::{accessible_information, AccessibleOptions};
    use qkd_audit::quantum::state::DensityMatrix;
    use rand::SeedableRng;
    let mut group = c.benchmark_group("accessible-search");
    group.throughput(Throughput::Elements(1));
    for d in [3usize, 4, 6] {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        let pairs: Vec<_> = (0..8)
            .map(|_| {
                [
                    DensityMatrix::random_hilbert_schmidt(d, &mut rng).matrix().clone(),
                    DensityMatrix::random_hilbert_schmidt(d, &mut rng).matrix().clone(),
                ]
            })
            .collect();
        let mut k = 0;
        group.bench_function(format!("random-pair-d{d}"), |b| {
            b.iter(|| {
                k = (k + 1) % pairs.len();
                accessible_information(&[0.5, 0.5], black_box(&pairs[k]), &AccessibleOptions::default()).unwrap()
            })
        });
    }
    group.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(20).measurement_time(std::time::Duration::from_secs(2)).warm_up_time(std::time::Duration::from_millis(500));
    targets = bench_eval, bench_device, bench_qubit_pair, bench_accessible_search
}
criterion_main!(benches);
