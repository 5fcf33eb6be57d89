//! The Slurm example end to end: a single-node Slurm cluster (Debian's `slurm-wlm` and
//! `munge`, started here as root in a temporary folder, on ports of its own), the example
//! job-array script `examples/slurm-shards.sh` submitting one shard per array task and a
//! dependent merge, and the merged results folder compared with the single run; then a
//! tolerance search through the same script, round by round, compared with the single search.
//!
//! Needs root and the packages, which `.ci/run` installs; so it is `#[ignore]`d in the
//! default suite and `.ci/run` runs it explicitly. When the scheduler cannot start, the
//! test fails with the daemon's own messages (its stderr and the end of its log); it never
//! skips.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::time::{Duration, Instant};

/// How long the node may take to register with the controller. Measured: about a second
/// on a 2-core machine; twenty leaves room for a loaded one.
const NODE_UP_TIMEOUT: Duration = Duration::from_secs(20);

fn run(cmd: &str, args: &[&str], conf: &Path) -> Output {
    Command::new(cmd)
        .args(args)
        .env("SLURM_CONF", conf)
        .output()
        .unwrap_or_else(|e| panic!("cannot start `{cmd}` ({e}): install Debian's slurm-wlm and munge (as .ci/run does)"))
}

fn log_tail(path: &Path) -> String {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| format!("(no log at {}: {e})", path.display()));
    let lines: Vec<&str> = text.lines().collect();
    lines[lines.len().saturating_sub(20)..].join("\n")
}

fn started(what: &str, out: Output, log: &Path) {
    assert!(
        out.status.success(),
        "{what} did not start: status {:?}\nstderr: {}\nstdout: {}\nlog {}:\n{}",
        out.status,
        String::from_utf8_lossy(&out.stderr),
        String::from_utf8_lossy(&out.stdout),
        log.display(),
        log_tail(log)
    );
}

/// The daemons started here, stopped by their process ids when the test ends.
struct Daemons(Vec<PathBuf>);

impl Drop for Daemons {
    fn drop(&mut self) {
        for pid_file in self.0.iter().rev() {
            if let Ok(pid) = std::fs::read_to_string(pid_file) {
                let _ = Command::new("kill").arg(pid.trim()).status();
            }
        }
    }
}

fn files(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else {
                out.insert(p.strip_prefix(dir).unwrap().to_path_buf(), std::fs::read(&p).unwrap());
            }
        }
    }
    out
}

fn stable_manifest(bytes: &[u8]) -> serde_json::Value {
    let mut v: serde_json::Value = serde_json::from_slice(bytes).unwrap();
    for k in ["command_line", "started_unix_s", "elapsed_s", "threads"] {
        v.as_object_mut().unwrap().remove(k);
    }
    v
}

#[test]
#[ignore = "needs root and Debian's slurm-wlm and munge; .ci/run installs them and runs this test"]
fn slurm_job_array_and_merge_equal_the_single_run() {
    let tmp = tempfile::tempdir().unwrap();
    let t = tmp.path();
    let host = String::from_utf8(Command::new("hostname").arg("-s").output().expect("hostname runs").stdout).unwrap().trim().to_string();
    let cpus = std::thread::available_parallelism().map_or(1, |n| n.get());
    // Ports of our own, so that a system Slurm (or another run of this test) is not disturbed.
    let port = 20_000 + (std::process::id() % 20_000) as u16;
    let mut daemons = Daemons(Vec::new());

    // munge: a key for this test only (its cluster lives and dies here) and a socket in the
    // temporary folder.
    let key: Vec<u8> = (0..1024u32).map(|i| (i.wrapping_mul(2_654_435_761) >> 13) as u8 ^ (std::process::id() as u8)).collect();
    std::fs::write(t.join("munge.key"), key).unwrap();
    std::fs::set_permissions(t.join("munge.key"), std::os::unix::fs::PermissionsExt::from_mode(0o600)).unwrap();
    let sock = t.join("munge.sock");
    let conf = t.join("slurm.conf");
    let arg = |name: &str, p: &Path| format!("--{name}={}", p.display());
    daemons.0.push(t.join("munged.pid"));
    let out = run(
        "munged",
        &[
            "--force",
            &arg("socket", &sock),
            &arg("key-file", &t.join("munge.key")),
            &arg("pid-file", &t.join("munged.pid")),
            &arg("log-file", &t.join("munged.log")),
            &arg("seed-file", &t.join("munge.seed")),
        ],
        &conf,
    );
    started("munged", out, &t.join("munged.log"));

    std::fs::create_dir_all(t.join("state")).unwrap();
    std::fs::create_dir_all(t.join("spool")).unwrap();
    let d = t.display();
    std::fs::write(
        &conf,
        format!(
            "ClusterName=qkdtest\nSlurmctldHost={host}\nSlurmctldPort={port}\nSlurmdPort={}\nSlurmUser=root\nSlurmdUser=root\n\
             AuthType=auth/munge\nCredType=cred/munge\nAuthInfo=socket={}\nStateSaveLocation={d}/state\nSlurmdSpoolDir={d}/spool\n\
             SlurmctldPidFile={d}/slurmctld.pid\nSlurmdPidFile={d}/slurmd.pid\nSlurmctldLogFile={d}/slurmctld.log\n\
             SlurmdLogFile={d}/slurmd.log\nProctrackType=proctrack/linuxproc\nTaskPlugin=task/none\nSelectType=select/cons_tres\n\
             SelectTypeParameters=CR_CPU\nSchedulerType=sched/backfill\nMpiDefault=none\nReturnToService=2\n\
             JobCompType=jobcomp/none\nAccountingStorageType=accounting_storage/none\nJobAcctGatherType=jobacct_gather/none\n\
             NodeName={host} CPUs={cpus} State=UNKNOWN\nPartitionName=test Nodes=ALL Default=YES MaxTime=INFINITE State=UP\n",
            port + 1,
            sock.display()
        ),
    )
    .unwrap();
    daemons.0.push(t.join("slurmctld.pid"));
    started("slurmctld", run("slurmctld", &["-c"], &conf), &t.join("slurmctld.log"));
    daemons.0.push(t.join("slurmd.pid"));
    started("slurmd", run("slurmd", &[], &conf), &t.join("slurmd.log"));
    let clock = Instant::now();
    loop {
        let out = run("sinfo", &["-h", "-o", "%T"], &conf);
        let state = String::from_utf8_lossy(&out.stdout).trim().to_string();
        if out.status.success() && state.starts_with("idle") {
            break;
        }
        assert!(
            clock.elapsed() < NODE_UP_TIMEOUT,
            "the node did not come up: sinfo says `{state}`, stderr {}\nslurmctld log:\n{}\nslurmd log:\n{}",
            String::from_utf8_lossy(&out.stderr),
            log_tail(&t.join("slurmctld.log")),
            log_tail(&t.join("slurmd.log"))
        );
        std::thread::sleep(Duration::from_millis(200));
    }

    // The single run, then the array of shards and the merge through the example script.
    let bin = env!("CARGO_BIN_EXE_qkd-audit");
    let single =
        Command::new(bin).args(["run", "--demo", "single-photon", "-q", "--results-dir", "single"]).current_dir(t).output().unwrap();
    assert!(single.status.success(), "{}", String::from_utf8_lossy(&single.stderr));
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/slurm-shards.sh");
    let out = Command::new(&script)
        .args(["4", "merged", "--", "run", "--demo", "single-photon", "-q"])
        .current_dir(t)
        .env("SLURM_CONF", &conf)
        .env("QKD_AUDIT", bin)
        .env("SHARD_DIR", "shards")
        .env("WAIT", "1")
        .output()
        .unwrap();
    let logs: Vec<String> = std::fs::read_dir(t.join("shards"))
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .filter(|e| e.file_name().to_string_lossy().ends_with(".out"))
                .map(|e| format!("{}:\n{}", e.path().display(), std::fs::read_to_string(e.path()).unwrap_or_default()))
                .collect()
        })
        .unwrap_or_default();
    assert!(
        out.status.success(),
        "the array or the merge failed: status {:?}\nstderr: {}\njob logs:\n{}\nslurmctld log:\n{}",
        out.status,
        String::from_utf8_lossy(&out.stderr),
        logs.join("\n"),
        log_tail(&t.join("slurmctld.log"))
    );
    for k in 1..=4 {
        assert!(t.join(format!("shards/run-shard-{k}-of-4.toml")).exists(), "shard {k} wrote nothing");
    }
    let (a, b) = (files(&t.join("single")), files(&t.join("merged")));
    assert_eq!(a.keys().collect::<Vec<_>>(), b.keys().collect::<Vec<_>>());
    for (k, v) in &a {
        if k.ends_with("manifest.json") {
            assert_eq!(stable_manifest(v), stable_manifest(&b[k]));
        } else if k.ends_with("report.html") {
            // The page's run lines (command line, start, duration) differ between any two
            // runs, as in the manifest.
            let stable = |b: &[u8]| -> Vec<String> {
                String::from_utf8_lossy(b).lines().filter(|l| !l.contains("class=\"run")).map(str::to_string).collect()
            };
            assert_eq!(stable(v), stable(&b[k]), "report.html differs");
        } else {
            assert!(v == &b[k], "{} differs", k.display());
        }
    }

    // A tolerance search, round by round: the script submits an array and a merge per round
    // and prints the result once the search is finished.
    std::fs::write(t.join("c.toml"), TOLERANCE_CAMPAIGN).unwrap();
    let search = [
        "tolerance",
        "c.toml",
        "--key",
        "abort_qber",
        "--from",
        "0.04",
        "--to",
        "0.08",
        "--bisections",
        "4",
        "--trials",
        "1100",
        "--max-trials",
        "4400",
        "--threshold",
        "0.001",
    ];
    let single = Command::new(bin).args(search).args(["--evidence", "single.csv", "-q"]).current_dir(t).output().unwrap();
    assert_eq!(single.status.code(), Some(0), "{}", String::from_utf8_lossy(&single.stderr));
    let out = Command::new(&script)
        .args(["3", "merged.csv", "--"])
        .args(search)
        .current_dir(t)
        .env("SLURM_CONF", &conf)
        .env("QKD_AUDIT", bin)
        .env("SHARD_DIR", "tolerance-shards")
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "the rounds failed: {err}\nslurmctld log:\n{}", log_tail(&t.join("slurmctld.log")));
    assert!(err.contains("finished after") && !err.contains("finished after 1 round"), "{err}");
    assert_eq!(String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&single.stdout));
    assert_eq!(std::fs::read(t.join("merged.csv")).unwrap(), std::fs::read(t.join("single.csv")).unwrap());
    // Shards that fail (an unknown key) stop the rounds at once, with exit status 2.
    let mut bad = search;
    bad[3] = "colour";
    let out = Command::new(&script)
        .args(["2", "bad.csv", "--"])
        .args(bad)
        .current_dir(t)
        .env("SLURM_CONF", &conf)
        .env("QKD_AUDIT", bin)
        .env("SHARD_DIR", "bad-shards")
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("round 1 did not merge"), "{err}");
    assert!(!t.join("bad.csv").exists());
    drop(daemons);
}

/// The search of `tests/shards.rs`: bisections, and values needing several looks.
const TOLERANCE_CAMPAIGN: &str = include_str!("data/abort-threshold.toml");
