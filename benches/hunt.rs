//! Attack hunting speed. Target (issue: attack hunting): one `holevo` hunt at one Q with
//! d_E = 4 and 32 starts in under 5 s on 2 cores. Results are recorded in DEVELOPERS.md.

use criterion::{criterion_group, criterion_main, Criterion};
use qkd_audit::protocol::Protocol;
use qkd_audit::search::hunt::{hunt, HuntOptions, Objective};

fn holevo_hunt(c: &mut Criterion) {
    let opts = HuntOptions { protocol: Protocol::Bb84, objective: Objective::Holevo, eve_dim: 4, starts: 32, seed: 1, max_iters: 100 };
    let mut group = c.benchmark_group("hunt");
    group.sample_size(10);
    group.bench_function("holevo, Q = 0.05, d_E = 4, 32 starts (2 threads)", |b| b.iter(|| hunt(&opts, &[0.05]).unwrap()[0].value));
    group.finish();
}

/// One start per objective on one thread: the figures before and after the
/// objective-specific evaluation (issue: speed and scale, target ≥ 5×) in DEVELOPERS.md.
fn per_objective(c: &mut Criterion) {
    let pool = rayon::ThreadPoolBuilder::new().num_threads(1).build().unwrap();
    let mut group = c.benchmark_group("hunt, 4 starts at Q = 0.05, d_E = 4 (1 thread)");
    group.sample_size(10);
    for objective in [Objective::Holevo, Objective::Guess, Objective::Game, Objective::Accessible] {
        let opts = HuntOptions { protocol: Protocol::Bb84, objective, eve_dim: 4, starts: 4, seed: 1, max_iters: 100 };
        group.bench_function(objective.name(), |b| b.iter(|| pool.install(|| hunt(&opts, &[0.05]).unwrap()[0].value)));
    }
    group.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(10).measurement_time(std::time::Duration::from_secs(5)).warm_up_time(std::time::Duration::from_millis(100));
    targets = holevo_hunt, per_objective
}
criterion_main!(benches);
