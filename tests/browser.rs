//! The demo's `report.html` in a real browser: headless Chromium (Debian's `chromium`,
//! installed by `.ci/run`) loads it with no console message and no network request, the
//! verdict matrix, every figure and a `<script>`-named setup (shown as text) are in the DOM,
//! a screenshot at A4 width (794 CSS px) is a non-empty PNG, and at that width the page has
//! no horizontal scrolling and the matrix sits on the first screen.
//!
//! The detectors are tested too: a probe page that logs to the console and requests an
//! image over the network must trip both, so that a silent browser cannot make this pass.
//! Without a browser the test fails with instructions; it never skips.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// A4 width in CSS pixels (210 mm at 96 px per inch) and the height of a first screen.
const A4_WIDTH_PX: u32 = 794;
const A4_HEIGHT_PX: u32 = 1123;
/// Longest a browser run may take before the test fails (a cold start takes about 2 s here).
const BROWSER_TIMEOUT: Duration = Duration::from_secs(90);

fn chromium() -> PathBuf {
    if let Some(p) = std::env::var_os("QKD_AUDIT_CHROMIUM") {
        return PathBuf::from(p);
    }
    let path = std::env::var_os("PATH").unwrap_or_default();
    for dir in std::env::split_paths(&path) {
        for name in ["chromium", "chromium-browser"] {
            let p = dir.join(name);
            if p.is_file() {
                return p;
            }
        }
    }
    panic!(
        "BROWSER TEST CANNOT RUN: no `chromium` on PATH. Install it (Debian: `apt-get install -y chromium`; .ci/run does this) or \
         set QKD_AUDIT_CHROMIUM to a Chromium binary. This test fails rather than skip."
    );
}

/// What one headless run gave.
struct Run {
    stdout: String,
    stderr: String,
    netlog: String,
}

/// Runs headless Chromium on `page` with `extra` flags, a fresh profile, logging to stderr
/// and a network log.
fn browse(page: &Path, extra: &[String], work: &Path, tag: &str) -> Run {
    let profile = work.join(format!("profile-{tag}"));
    let netlog = work.join(format!("net-{tag}.json"));
    let mut cmd = Command::new(chromium());
    cmd.args([
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--no-first-run",
        "--enable-logging=stderr",
        "--v=0",
        &format!("--window-size={A4_WIDTH_PX},{A4_HEIGHT_PX}"),
        &format!("--user-data-dir={}", profile.display()),
        &format!("--log-net-log={}", netlog.display()),
    ])
    .args(extra)
    .arg(format!("file://{}", page.display()))
    .stdout(Stdio::piped())
    .stderr(Stdio::piped());
    let out_file = work.join(format!("stdout-{tag}"));
    let err_file = work.join(format!("stderr-{tag}"));
    cmd.stdout(std::fs::File::create(&out_file).unwrap()).stderr(std::fs::File::create(&err_file).unwrap());
    let mut child = cmd.spawn().unwrap_or_else(|e| panic!("cannot start {}: {e}", chromium().display()));
    let start = Instant::now();
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            assert!(status.success(), "chromium exited with {status}: {}", std::fs::read_to_string(&err_file).unwrap_or_default());
            break;
        }
        if start.elapsed() > BROWSER_TIMEOUT {
            let _ = child.kill();
            let _ = child.wait();
            panic!("chromium took more than {BROWSER_TIMEOUT:?} on {}", page.display());
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    Run {
        stdout: std::fs::read_to_string(&out_file).unwrap(),
        stderr: std::fs::read_to_string(&err_file).unwrap(),
        netlog: std::fs::read_to_string(&netlog).unwrap_or_default(),
    }
}

/// Console messages the page produced (Chromium logs them as `CONSOLE` lines).
fn console_lines(run: &Run) -> Vec<String> {
    run.stderr.lines().filter(|l| l.contains(":CONSOLE")).map(str::to_string).collect()
}

/// URLs of requests that the page (a `file://` document) started, from the network log:
/// the URL_REQUEST_START_JOB events whose isolation key is the page's `file://` site. The
/// browser's own background requests have other keys and are not the page's doing.
fn page_requests(run: &Run) -> Vec<String> {
    assert!(!run.netlog.is_empty(), "no network log written");
    // A log cut short at exit lacks its closing brackets; the events before are complete.
    let text = run.netlog.trim_end();
    let v: serde_json::Value = serde_json::from_str(text)
        .or_else(|_| serde_json::from_str(&format!("{}]}}", text.trim_end_matches(','))))
        .expect("network log is JSON");
    let start_job = v["constants"]["logEventTypes"]["URL_REQUEST_START_JOB"].as_u64().expect("event type");
    v["events"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|e| e["type"].as_u64() == Some(start_job))
        .filter(|e| e["params"]["network_isolation_key"].as_str().is_some_and(|k| k.contains("file://")))
        .map(|e| e["params"]["url"].as_str().unwrap_or("").to_string())
        .collect()
}

#[test]
fn the_demo_report_reads_in_a_real_browser_at_a4_width() {
    let work = tempfile::tempdir().unwrap();
    let work = work.path();
    // The decoy demo, few trials, with a setup name that must be shown as text.
    let demo = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/campaigns/demo-decoy.toml")).unwrap();
    let hostile = "saltmarsh <script>document.title='owned'</script> link";
    let text =
        demo.replace("trials = 200", "trials = 20").replace("name = \"saltmarsh-quarryhill-decoy-link\"", &format!("name = \"{hostile}\""));
    assert_ne!(text, demo);
    std::fs::write(work.join("demo.toml"), text).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_qkd-audit")).args(["run", "demo.toml", "-q"]).current_dir(work).output().unwrap();
    assert_eq!(out.status.code(), Some(0), "{}", String::from_utf8_lossy(&out.stderr));
    let folder = work.join("results/saltmarsh-quarryhill-decoy");
    let report = folder.join("report.html");
    let figures =
        std::fs::read_dir(&folder).unwrap().filter(|e| e.as_ref().unwrap().path().extension().is_some_and(|x| x == "svg")).count();

    // The detectors work: a probe page with a console message and a network request trips both.
    let probe = work.join("probe.html");
    std::fs::write(
        &probe,
        "<!DOCTYPE html><p>probe</p><img src=\"http://127.0.0.1:9/probe.png\"><script>console.error('probe-message')</script>",
    )
    .unwrap();
    let p = browse(&probe, &["--virtual-time-budget=2000".into(), "--dump-dom".into()], work, "probe");
    assert!(console_lines(&p).iter().any(|l| l.contains("probe-message")), "console detector is blind: {}", p.stderr);
    assert!(page_requests(&p).iter().any(|u| u.contains("127.0.0.1:9/probe.png")), "network detector is blind");

    // The report: DOM, console, network.
    let r = browse(&report, &["--virtual-time-budget=2000".into(), "--dump-dom".into()], work, "report");
    let dom = &r.stdout;
    assert!(dom.contains("id=\"verdict-matrix\"") && dom.contains("id=\"overall-verdict\""), "verdict and matrix in the DOM");
    assert_eq!(dom.matches("<figure ").count(), figures, "every figure in the DOM");
    assert_eq!(dom.matches("<svg ").count(), figures);
    assert!(dom.contains("saltmarsh &lt;script&gt;document.title='owned'&lt;/script&gt; link"), "the name shown as text");
    assert!(!dom.contains("<script"), "no script element in the DOM");
    assert!(dom.contains("<title>qkd-audit evidence report"), "the name did not run: the title is intact");
    assert!(console_lines(&r).is_empty(), "console messages: {:?}", console_lines(&r));
    assert!(page_requests(&r).is_empty(), "network requests: {:?}", page_requests(&r));

    // A screenshot at A4 width: a PNG of that width, not empty.
    let shot = work.join("report.png");
    browse(&report, &[format!("--screenshot={}", shot.display()), "--hide-scrollbars".into()], work, "shot");
    let png = std::fs::read(&shot).expect("screenshot written");
    assert!(png.len() > 10_000 && png.starts_with(b"\x89PNG\r\n\x1a\n"), "screenshot is a non-empty PNG ({} bytes)", png.len());
    let width = u32::from_be_bytes(png[16..20].try_into().unwrap());
    assert_eq!(width, A4_WIDTH_PX);

    // At A4 width: no horizontal scrolling, the matrix fits and starts on the first screen.
    // A copy of the page measures itself and writes the figures into its DOM (the report
    // itself has no script).
    let measured = work.join("measure.html");
    let probe_script = "<script>window.addEventListener('load',function(){var m=document.getElementById('verdict-matrix').getBoundingClientRect();\
        var d=document.documentElement;var out=document.createElement('pre');out.id='measure';\
        out.textContent=['inner='+window.innerWidth,'scroll='+d.scrollWidth,'matrix_left='+Math.floor(m.left),'matrix_right='+Math.ceil(m.right),\
        'matrix_top='+Math.floor(m.top),'figures_wider='+Array.from(document.querySelectorAll('figure svg')).filter(function(s){return s.getBoundingClientRect().right>window.innerWidth}).length].join(' ');\
        document.body.appendChild(out);});</script>";
    let page = std::fs::read_to_string(&report).unwrap().replace("</body>", &format!("{probe_script}</body>"));
    std::fs::write(&measured, page).unwrap();
    let m = browse(&measured, &["--virtual-time-budget=3000".into(), "--dump-dom".into(), "--hide-scrollbars".into()], work, "measure");
    let line =
        m.stdout.split("<pre id=\"measure\">").nth(1).and_then(|s| s.split("</pre>").next()).expect("measurement in the DOM").to_string();
    let get = |k: &str| -> i64 {
        line.split(' ')
            .find_map(|kv| kv.strip_prefix(&format!("{k}=")))
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| panic!("{k} in {line}"))
    };
    eprintln!("measured at A4 width: {line}");
    assert_eq!(get("inner"), i64::from(A4_WIDTH_PX), "{line}");
    assert!(get("scroll") <= get("inner"), "horizontal scrolling at A4 width: {line}");
    assert!(get("matrix_left") >= 0 && get("matrix_right") <= get("inner"), "matrix wider than A4: {line}");
    assert!(get("matrix_top") < i64::from(A4_HEIGHT_PX), "matrix below the first screen: {line}");
    assert_eq!(get("figures_wider"), 0, "{line}");
}
