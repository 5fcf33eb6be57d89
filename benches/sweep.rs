//! Sweep throughput per built-in single-photon family, with accessible information (what
//! `qkd-audit sweep` computes: closed forms per family, then the CSV), on one thread and on
//! two. Target (issue: speed and scale): ≥ 2 × 10⁵ points per second per core for every
//! family. Results are recorded in DEVELOPERS.md ("Speed and scale"); the machine is shared,
//! so that table gives CPU seconds of whole `qkd-audit sweep` runs, which load disturbs
//! less than these wall-clock figures.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use qkd_audit::attack::file::{builtin_catalogue, parse};
use qkd_audit::exact::eval::EvalOptions;
use qkd_audit::exact::sweep::{run_sweep, sweep_csv};
use qkd_audit::protocol::Protocol;

/// Points per sweep: enough that the per-sweep set-up is noise.
const POINTS: usize = 2000;

fn bench_sweep(c: &mut Criterion) {
    let mut group = c.benchmark_group("sweep points (with accessible information, CSV)");
    group.throughput(Throughput::Elements(POINTS as u64));
    for threads in [1usize, 2] {
        let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
        for (name, text) in builtin_catalogue() {
            let file = parse(text).expect("built-in entry parses");
            if file.is_pulse_attack() || file.sweep().is_none() {
                continue;
            }
            let label = name.trim_end_matches(".toml");
            group.bench_function(format!("{label}/{threads} thread(s)"), |b| {
                b.iter(|| {
                    pool.install(|| {
                        let points = run_sweep(&file, Some(POINTS), &EvalOptions::full(Protocol::Bb84)).unwrap();
                        sweep_csv(&points).unwrap().len()
                    })
                })
            });
        }
    }
    group.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(10).measurement_time(std::time::Duration::from_secs(2)).warm_up_time(std::time::Duration::from_millis(300));
    targets = bench_sweep
}
criterion_main!(benches);
