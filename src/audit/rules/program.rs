//! External rule programs: the vendor's own key-length code, run as a child process and
//! asked in batches over JSON Lines (protocol: `docs/rule-programs.md`).
//!
//! A rule file names the program instead of a formula:
//! ```toml
//! name = "vendor-pp"
//! command = ["python3", "pp/keylen.py", "--mode", "audit"]   # relative to this file's folder
//! timeout_s = 60                                             # per batch (default 60)
//! ```
//! The program runs in the rule file's folder, is started once per campaign run
//! ([`ProgramRule::start`]) and gets one request line per batch; it answers one line per
//! block, in order. Anything else — an exit, a batch unanswered within the timeout, a line
//! that is not JSON, a NaN, more key bits than the block's n (unless the block aborts), an
//! answer for another trial, an `error` object, more answers than blocks — stops the run with an error naming the command, the trial and the last
//! bytes the program wrote. Its stderr is kept (up to [`STDERR_LOG_MAX_BYTES`]) for the
//! log file the report writes, with the notes of its answers.
//!
//! Nothing here samples or judges; the engine batches the blocks (in point, then trial
//! order, so a deterministic program gives the same results for any thread count).

use super::block_vars::{self, VARIABLES};
use super::{BlockStats, RuleParams};
use crate::error::{Error, ErrorKind, Result};
use crate::input::Problems;
use std::io::{BufRead, BufReader, Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, ChildStdin, Command, Stdio};
use std::sync::mpsc::{channel, Receiver, RecvTimeoutError, Sender};
use std::time::{Duration, Instant};

/// The protocol's version, sent in every request; an answer that states another is refused.
pub const PROTOCOL_VERSION: u64 = 1;

/// Per-batch timeout when the rule file gives none, seconds: generous for an interpreted
/// program answering a few thousand blocks.
pub const DEFAULT_TIMEOUT_S: f64 = 60.0;

/// Largest per-batch timeout accepted, seconds.
pub const MAX_TIMEOUT_S: f64 = 86_400.0;

/// Longest answer line read, bytes: an answer is a few hundred bytes; a longer line is
/// garbage, and is not kept in memory.
pub const MAX_LINE_BYTES: u64 = 1 << 20;

/// How many of the last bytes the program wrote an error message shows.
pub const TAIL_BYTES: usize = 240;

/// Most stderr kept for the log file, bytes (the rest is counted, not kept).
pub const STDERR_LOG_MAX_BYTES: usize = 4 << 20;

/// Most answer notes kept for the log file.
pub const MAX_NOTES: usize = 10_000;

/// How long a program may take to exit once its input is closed, and `--version` to
/// answer, seconds.
const EXIT_GRACE_S: u64 = 10;

/// Largest file hashed for the manifest (an interpreter binary is a few MiB).
const MAX_HASHED_BYTES: u64 = 256 << 20;

/// A validated rule-program file.
#[derive(Debug)]
pub struct ProgramRule {
    /// Name in tables.
    pub name: String,
    /// Description, if given.
    pub description: String,
    /// The rule file.
    pub origin: String,
    /// The rule file's text (hashed into the manifest).
    pub text: String,
    /// The command as written (program and arguments).
    pub command: Vec<String>,
    /// Working folder: the rule file's folder.
    pub dir: PathBuf,
    /// Per-batch timeout.
    pub timeout: Duration,
}

/// A block's place in the campaign: point index, trial index.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct TrialId {
    /// Point index (the random-stream key).
    pub point: u64,
    /// Trial index within the point.
    pub trial: u64,
}

impl std::fmt::Display for TrialId {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "point {} trial {}", self.point, self.trial)
    }
}

/// One answer of a program.
#[derive(Clone, Debug, PartialEq)]
pub struct Answer {
    /// Its abort decision, if it gave one (else the setup's threshold decides).
    pub abort: Option<bool>,
    /// Key bits (fractions floored).
    pub length: u64,
}

/// A file and its SHA-256.
#[derive(Clone, Debug, serde::Serialize)]
pub struct FileHash {
    /// Path.
    pub path: String,
    /// SHA-256 of its bytes, hex (or why it could not be read).
    pub sha256: String,
}

/// Where a program came from, for the manifest.
#[derive(Clone, Debug, serde::Serialize)]
pub struct Provenance {
    /// Rule name.
    pub rule: String,
    /// The rule file.
    pub rule_file: String,
    /// The command as written.
    pub command: Vec<String>,
    /// The folder it runs in.
    pub working_dir: String,
    /// Every file the command names (the program found on PATH included), with its SHA-256.
    pub files: Vec<FileHash>,
    /// What `<command> --version` printed, when it exited 0 within the grace time.
    pub version_output: Option<String>,
}

/// The stderr and notes of one program run, for its log file.
#[derive(Clone, Debug, Default)]
pub struct ProgramLog {
    /// Rule name.
    pub rule: String,
    /// The command, as one line.
    pub command: String,
    /// Its stderr (lossy UTF-8, capped).
    pub stderr: String,
    /// Bytes of stderr beyond the cap.
    pub stderr_dropped: u64,
    /// Notes: (trial, note), capped at [`MAX_NOTES`].
    pub notes: Vec<(TrialId, String)>,
    /// Notes beyond the cap.
    pub notes_dropped: u64,
}

impl ProgramLog {
    /// The log file's name in the results folder.
    pub fn file_name(&self) -> String {
        format!("rule-program-{}.log", self.rule)
    }

    /// The log file's text.
    pub fn render(&self) -> String {
        let mut s = format!("# rule program `{}`: {}\n## stderr\n", self.rule, self.command);
        s.push_str(&self.stderr);
        if !self.stderr.is_empty() && !self.stderr.ends_with('\n') {
            s.push('\n');
        }
        if self.stderr_dropped > 0 {
            s.push_str(&format!("[{} further bytes of stderr not kept]\n", self.stderr_dropped));
        }
        s.push_str("## notes\n");
        for (id, note) in &self.notes {
            s.push_str(&format!("{} {}: {}\n", id.point, id.trial, note.replace(['\n', '\r'], " ")));
        }
        if self.notes_dropped > 0 {
            s.push_str(&format!("[{} further notes not kept]\n", self.notes_dropped));
        }
        s
    }
}

impl ProgramRule {
    /// Validates the program keys of a rule file (`name`, `description`, `command`,
    /// `timeout_s`); `dir` is the rule file's folder.
    pub fn from_table(t: &toml::Table, origin: &str, dir: &Path, text: &str) -> std::result::Result<ProgramRule, Vec<Error>> {
        let mut p = Problems::new();
        p.nested("", crate::input::unknown_keys(t, &["name", "description", "command", "timeout_s"], "a rule-program file"));
        let name = match t.get("name") {
            Some(v) => p.check(super::rule_name(v, "name")).unwrap_or_default(),
            None => {
                p.push(Error::input_key("name", "missing: the rule's name"));
                String::new()
            }
        };
        let description = t.get("description").and_then(|v| v.as_str()).unwrap_or_default().to_string();
        let command: Vec<String> = match t.get("command") {
            Some(toml::Value::Array(a))
                if !a.is_empty() && a.iter().all(|v| v.as_str().is_some_and(|s| !s.is_empty() && !s.contains('\0'))) =>
            {
                a.iter().filter_map(|v| v.as_str().map(str::to_string)).collect()
            }
            _ => {
                p.push(Error::input_key("command", "must be a non-empty list of non-empty strings: the program and its arguments"));
                Vec::new()
            }
        };
        let timeout = match t.get("timeout_s") {
            None => DEFAULT_TIMEOUT_S,
            Some(v) => p
                .check(crate::input::number(v, "timeout_s").and_then(|x| {
                    if x > 0.0 && x <= MAX_TIMEOUT_S {
                        Ok(x)
                    } else {
                        Err(Error::input_key("timeout_s", format!("{x} is outside (0, {MAX_TIMEOUT_S}] seconds")))
                    }
                }))
                .unwrap_or(DEFAULT_TIMEOUT_S),
        };
        p.finish(ProgramRule {
            name,
            description,
            origin: origin.to_string(),
            text: text.to_string(),
            command,
            dir: dir.to_path_buf(),
            timeout: Duration::from_secs_f64(timeout),
        })
    }

    /// The command as one line, for messages.
    pub fn command_line(&self) -> String {
        self.command.iter().map(|a| if a.contains(' ') { format!("'{a}'") } else { a.clone() }).collect::<Vec<_>>().join(" ")
    }

    /// The program to execute: a path with a `/` is taken relative to the rule file's
    /// folder; a bare name is looked up on PATH by the operating system.
    fn program(&self) -> PathBuf {
        let p = Path::new(&self.command[0]);
        if self.command[0].contains('/') && p.is_relative() {
            self.dir.join(p)
        } else {
            p.to_path_buf()
        }
    }

    fn spawn(&self, extra: &[&str], stdin: Stdio) -> std::io::Result<Child> {
        Command::new(self.program())
            .args(&self.command[1..])
            .args(extra)
            .current_dir(&self.dir)
            .stdin(stdin)
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
    }

    /// Every file the command names (an argument that is a regular file, relative to the
    /// working folder, and the program itself, found on PATH if bare), for the manifest.
    pub fn named_files(&self) -> Vec<PathBuf> {
        let mut out = Vec::new();
        for (i, a) in self.command.iter().enumerate() {
            let p = Path::new(a);
            let candidate = if i == 0 && !a.contains('/') {
                std::env::var_os("PATH").and_then(|path| std::env::split_paths(&path).map(|d| d.join(p)).find(|c| c.is_file()))
            } else if p.is_relative() {
                Some(self.dir.join(p))
            } else {
                Some(p.to_path_buf())
            };
            if let Some(c) = candidate.filter(|c| c.is_file()) {
                if !out.contains(&c) {
                    out.push(c);
                }
            }
        }
        out
    }

    /// The manifest's record: the command, the SHA-256 of the files it names, and what
    /// `<command> --version` printed (if it exits 0 within the grace time).
    pub fn provenance(&self) -> Provenance {
        use sha2::{Digest, Sha256};
        let files = self
            .named_files()
            .into_iter()
            .map(|path| {
                let sha256 = std::fs::File::open(&path)
                    .and_then(|f| {
                        let mut bytes = Vec::new();
                        f.take(MAX_HASHED_BYTES).read_to_end(&mut bytes)?;
                        Ok(Sha256::digest(&bytes).iter().map(|b| format!("{b:02x}")).collect())
                    })
                    .unwrap_or_else(|e| format!("unreadable: {e}"));
                FileHash { path: path.display().to_string(), sha256 }
            })
            .collect();
        ProgramRule::provenance_with(self, files)
    }

    fn provenance_with(&self, files: Vec<FileHash>) -> Provenance {
        let version_output = self.version_output();
        Provenance {
            rule: self.name.clone(),
            rule_file: self.origin.clone(),
            command: self.command.clone(),
            working_dir: self.dir.display().to_string(),
            files,
            version_output,
        }
    }

    fn version_output(&self) -> Option<String> {
        let mut child = self.spawn(&["--version"], Stdio::null()).ok()?;
        let mut out = child.stdout.take()?;
        let (tx, rx) = channel();
        std::thread::spawn(move || {
            let mut text = Vec::new();
            let _ = (&mut out).take(4096).read_to_end(&mut text);
            let _ = tx.send(text);
        });
        let text = rx.recv_timeout(Duration::from_secs(EXIT_GRACE_S));
        let status = wait_with_grace(&mut child);
        match (text, status) {
            (Ok(t), Some(s)) if s.success() => {
                let t = String::from_utf8_lossy(&t).trim().to_string();
                (!t.is_empty()).then_some(t)
            }
            _ => None,
        }
    }

    /// Starts the program for a campaign run.
    pub fn start(&self) -> Result<Session> {
        let mut child = self.spawn(&[], Stdio::piped()).map_err(|e| {
            Error::new(
                ErrorKind::Io,
                format!(
                    "rule program `{}` (rule file {}): cannot start `{}`: {e}",
                    self.command_line(),
                    self.origin,
                    self.program().display()
                ),
            )
        })?;
        let stdin = child.stdin.take().expect("piped stdin");
        let stdout = child.stdout.take().expect("piped stdout");
        let stderr = child.stderr.take().expect("piped stderr");
        let (to_child, writer_rx) = channel::<Vec<u8>>();
        let writer = std::thread::spawn(move || write_requests(stdin, writer_rx));
        let (line_tx, lines) = channel();
        std::thread::spawn(move || read_lines(stdout, line_tx));
        let (stderr_tx, stderr_rx) = channel();
        std::thread::spawn(move || {
            let _ = stderr_tx.send(read_capped(stderr));
        });
        Ok(Session {
            name: self.name.clone(),
            command: self.command_line(),
            origin: self.origin.clone(),
            timeout: self.timeout,
            child,
            to_child: Some(to_child),
            writer: Some(writer),
            lines,
            stderr: Some(stderr_rx),
            tail: Vec::new(),
            batch: 0,
            log: ProgramLog { rule: self.name.clone(), command: self.command_line(), ..Default::default() },
        })
    }
}

fn write_requests(mut stdin: ChildStdin, rx: Receiver<Vec<u8>>) {
    for bytes in rx {
        if stdin.write_all(&bytes).and_then(|_| stdin.flush()).is_err() {
            // The program is gone or closed its input: the reader sees the rest.
            return;
        }
    }
}

enum Line {
    Data(Vec<u8>),
    TooLong(Vec<u8>),
    Eof,
    Failed(String),
}

fn read_lines(stdout: std::process::ChildStdout, tx: Sender<Line>) {
    let mut reader = BufReader::with_capacity(1 << 16, stdout);
    loop {
        let mut buf = Vec::new();
        let line = match (&mut reader).take(MAX_LINE_BYTES + 1).read_until(b'\n', &mut buf) {
            Ok(0) => Line::Eof,
            Ok(_) if buf.last() == Some(&b'\n') => Line::Data(buf),
            Ok(_) if buf.len() as u64 > MAX_LINE_BYTES => {
                buf.drain(..buf.len() - TAIL_BYTES);
                Line::TooLong(buf)
            }
            Ok(_) => Line::Data(buf),
            Err(e) => Line::Failed(e.to_string()),
        };
        let stop = !matches!(line, Line::Data(_));
        if tx.send(line).is_err() || stop {
            return;
        }
    }
}

/// Reads a stream to its end, keeping the first [`STDERR_LOG_MAX_BYTES`] bytes and
/// counting the rest.
fn read_capped(mut r: impl Read) -> (Vec<u8>, u64) {
    let mut kept = Vec::new();
    let mut dropped = 0u64;
    let mut buf = [0u8; 8192];
    loop {
        match r.read(&mut buf) {
            Ok(0) | Err(_) => return (kept, dropped),
            Ok(n) => {
                let room = STDERR_LOG_MAX_BYTES.saturating_sub(kept.len()).min(n);
                kept.extend_from_slice(&buf[..room]);
                dropped += (n - room) as u64;
            }
        }
    }
}

fn wait_with_grace(child: &mut Child) -> Option<std::process::ExitStatus> {
    let end = Instant::now() + Duration::from_secs(EXIT_GRACE_S);
    loop {
        match child.try_wait() {
            Ok(Some(s)) => return Some(s),
            Ok(None) if Instant::now() < end => std::thread::sleep(Duration::from_millis(2)),
            _ => {
                let _ = child.kill();
                let _ = child.wait();
                return None;
            }
        }
    }
}

/// A running rule program.
pub struct Session {
    name: String,
    command: String,
    origin: String,
    timeout: Duration,
    child: Child,
    to_child: Option<Sender<Vec<u8>>>,
    writer: Option<std::thread::JoinHandle<()>>,
    lines: Receiver<Line>,
    stderr: Option<Receiver<(Vec<u8>, u64)>>,
    /// The last bytes the program wrote to stdout.
    tail: Vec<u8>,
    batch: u64,
    log: ProgramLog,
}

/// A double as JSON: an integer when it is one, else the shortest decimal that reads back
/// as the same double; `null` for NaN (JSON has no NaN), ±1e999 for ±∞.
fn push_number(out: &mut String, x: f64) {
    use std::fmt::Write;
    if x.is_finite() && x.fract() == 0.0 && x.abs() < 1e15 {
        // Counts as integers.
        let _ = write!(out, "{}", x as i64);
    } else if x.is_finite() {
        // Shortest round-trip decimal, with an exponent for very small or large values.
        let _ = write!(out, "{x:?}");
    } else if x.is_nan() {
        out.push_str("null");
    } else if x > 0.0 {
        out.push_str("1e999");
    } else {
        out.push_str("-1e999");
    }
}

/// The request line of one batch (see `docs/rule-programs.md`). Per-intensity variables
/// of intensities the link does not have are left out.
pub fn request(rule: &str, batch: u64, blocks: &[(TrialId, &BlockStats, &RuleParams)]) -> String {
    use std::fmt::Write;
    let mut s = String::with_capacity(64 + blocks.len() * 700);
    let _ = write!(
        s,
        "{{\"version\":{PROTOCOL_VERSION},\"type\":\"batch\",\"rule\":{},\"batch\":{batch},\"blocks\":[",
        serde_json::Value::from(rule)
    );
    for (i, (id, obs, params)) in blocks.iter().enumerate() {
        if i > 0 {
            s.push(',');
        }
        let _ = write!(s, "{{\"point\":{},\"trial\":{}", id.point, id.trial);
        let values = block_vars::values(obs, params);
        let present = obs.intensities.map_or(0, |l| l.count);
        for (slot, (v, x)) in VARIABLES.iter().zip(values).enumerate() {
            if block_vars::intensity_of(slot).is_some_and(|i| i > present) {
                continue;
            }
            let _ = write!(s, ",\"{}\":", v.name);
            push_number(&mut s, x);
        }
        s.push('}');
    }
    s.push_str("]}\n");
    s
}

impl Session {
    /// Asks the program about one batch of blocks (in the engine's order) and reads one
    /// answer per block, checking each.
    pub fn ask(&mut self, blocks: &[(TrialId, &BlockStats, &RuleParams)]) -> Result<Vec<Answer>> {
        if blocks.is_empty() {
            return Ok(Vec::new());
        }
        let line = request(&self.name, self.batch, blocks);
        let first = blocks[0].0;
        if !self.to_child.as_ref().is_some_and(|tx| tx.send(line.into_bytes()).is_ok()) {
            return Err(self.fail("its input closed before the batch was sent", Some(first)));
        }
        let deadline = Instant::now() + self.timeout;
        let mut answers = Vec::with_capacity(blocks.len());
        for &(id, obs, params) in blocks {
            let wait = deadline.saturating_duration_since(Instant::now());
            let line = match self.lines.recv_timeout(wait) {
                Ok(Line::Data(l)) => l,
                Ok(Line::TooLong(t)) => {
                    self.keep_tail(&t);
                    return Err(self.fail(&format!("wrote a line longer than {MAX_LINE_BYTES} bytes"), Some(id)));
                }
                Ok(Line::Eof) | Err(RecvTimeoutError::Disconnected) => {
                    let status = wait_with_grace(&mut self.child).map_or("did not exit".to_string(), |s| s.to_string());
                    return Err(self.fail(&format!("ended its output before answering ({status})"), Some(id)));
                }
                Ok(Line::Failed(e)) => return Err(self.fail(&format!("its output could not be read: {e}"), Some(id))),
                Err(RecvTimeoutError::Timeout) => {
                    return Err(self.fail(&format!("did not answer within the batch timeout of {} s", self.timeout.as_secs_f64()), Some(id)))
                }
            };
            self.keep_tail(&line);
            match self.parse_answer(&line, id, obs, params) {
                Ok(a) => answers.push(a),
                Err(what) => return Err(self.fail(&what, Some(id))),
            }
        }
        self.batch += 1;
        Ok(answers)
    }

    fn keep_tail(&mut self, bytes: &[u8]) {
        self.tail.extend_from_slice(bytes);
        if self.tail.len() > TAIL_BYTES {
            self.tail.drain(..self.tail.len() - TAIL_BYTES);
        }
    }

    /// Checks one answer line for the block `obs` (judged with `params`); the error says
    /// what is wrong with it.
    fn parse_answer(&mut self, line: &[u8], id: TrialId, obs: &BlockStats, params: &RuleParams) -> std::result::Result<Answer, String> {
        let text = std::str::from_utf8(line).map_err(|_| "wrote an answer that is not UTF-8".to_string())?.trim();
        let v: serde_json::Value = serde_json::from_str(text).map_err(|e| {
            if ["NaN", "Infinity"].iter().any(|w| text.contains(w)) {
                format!("answered a NaN or infinite number, which is never a key length ({e})")
            } else {
                format!("wrote an answer that is not a JSON object on one line ({e})")
            }
        })?;
        let obj = v.as_object().ok_or("wrote an answer that is not a JSON object")?;
        if let Some(e) = obj.get("error") {
            let msg = e.get("message").and_then(|m| m.as_str()).or(e.as_str()).map_or_else(|| e.to_string(), str::to_string);
            return Err(format!("reported an error: {msg}"));
        }
        if let Some(ver) = obj.get("version") {
            if ver.as_u64() != Some(PROTOCOL_VERSION) {
                return Err(format!("speaks protocol version {ver}; this tool speaks version {PROTOCOL_VERSION}"));
            }
        }
        let (point, trial) = (obj.get("point").and_then(|x| x.as_u64()), obj.get("trial").and_then(|x| x.as_u64()));
        if (point, trial) != (Some(id.point), Some(id.trial)) {
            let shown = |x: Option<u64>| x.map_or("-".to_string(), |x| x.to_string());
            return Err(format!(
                "answered point {} trial {} where point {} trial {} was due (answers must come one per block, in the order sent)",
                shown(point),
                shown(trial),
                id.point,
                id.trial
            ));
        }
        let raw_bits = match obj.get("key_bits").and_then(|k| k.as_f64()) {
            Some(x) if (0.0..u64::MAX as f64).contains(&x) => x,
            Some(x) => return Err(format!("answered key_bits = {x}; key_bits must be a finite number ≥ 0")),
            None => return Err("answered without a numeric key_bits".into()),
        };
        let abort = match obj.get("abort") {
            None | Some(serde_json::Value::Null) => None,
            Some(serde_json::Value::Bool(b)) => Some(*b),
            Some(other) => return Err(format!("answered abort = {other}; abort must be true or false")),
        };
        // As for a formula ([`super::Rule::answer`]): no key is longer than the block's key
        // bits, so a larger answer for a block that goes on to key is a broken program, not
        // a leak to be measured. An aborted block's length is never used.
        if !abort.unwrap_or_else(|| params.threshold_aborts(obs)) && raw_bits > obs.n as f64 {
            return Err(format!("answered key_bits = {raw_bits}, more than the block's n = {} key bits", obs.n));
        }
        if let Some(note) = obj.get("note").and_then(|n| n.as_str()) {
            if self.log.notes.len() < MAX_NOTES {
                self.log.notes.push((id, note.chars().take(1000).collect()));
            } else {
                self.log.notes_dropped += 1;
            }
        }
        Ok(Answer { abort, length: raw_bits.floor() as u64 })
    }

    /// Stops the program and builds the error: the command, what went wrong at which trial,
    /// the last bytes it wrote and the end of its stderr.
    fn fail(&mut self, what: &str, id: Option<TrialId>) -> Error {
        let _ = self.child.kill();
        let _ = self.child.wait();
        self.to_child = None;
        let stderr = self.collect_stderr();
        let stderr_tail: String = {
            let t = stderr.trim_end();
            let start = t.char_indices().rev().nth(TAIL_BYTES).map_or(0, |(i, _)| i);
            t[start..].to_string()
        };
        Error::new(
            ErrorKind::Io,
            format!(
                "rule program `{}` (rule `{}`, rule file {}) {what}{}; the last bytes it wrote: {:?}{}",
                self.command,
                self.name,
                self.origin,
                id.map_or(String::new(), |id| format!(", at {id} (batch {})", self.batch)),
                String::from_utf8_lossy(&self.tail),
                if stderr_tail.is_empty() { String::new() } else { format!("; its stderr ends: {stderr_tail:?}") }
            ),
        )
    }

    fn collect_stderr(&mut self) -> String {
        if let Some(rx) = self.stderr.take() {
            if let Ok((bytes, dropped)) = rx.recv_timeout(Duration::from_secs(EXIT_GRACE_S)) {
                self.log.stderr = String::from_utf8_lossy(&bytes).into_owned();
                self.log.stderr_dropped = dropped;
            }
        }
        self.log.stderr.clone()
    }

    /// Closes the program's input and waits for it to exit: it must write nothing more and
    /// exit with status 0. Gives its stderr and notes for the log file.
    pub fn finish(mut self) -> Result<ProgramLog> {
        // Closing the channel ends the writer thread, which closes the program's input. It is
        // not joined: a program that stopped reading would keep it blocked in a write until
        // the program is gone.
        self.to_child = None;
        self.writer = None;
        let after = None;
        let last = |s: &Session| format!("after the last batch ({} batches)", s.batch);
        match self.lines.recv_timeout(Duration::from_secs(EXIT_GRACE_S)) {
            Ok(Line::Eof) | Err(RecvTimeoutError::Disconnected) => {}
            Ok(Line::Data(l)) | Ok(Line::TooLong(l)) => {
                self.keep_tail(&l);
                let what = format!("wrote more answers than blocks ({})", last(&self));
                return Err(self.fail(&what, after));
            }
            Ok(Line::Failed(e)) => return Err(self.fail(&format!("its output could not be read: {e}"), after)),
            Err(RecvTimeoutError::Timeout) => {
                let what = format!("did not close its output within {EXIT_GRACE_S} s of its input closing");
                return Err(self.fail(&what, after));
            }
        }
        match wait_with_grace(&mut self.child) {
            Some(s) if s.success() => {}
            other => {
                let what = format!(
                    "exited with {} {}",
                    other.map_or("no status (killed after the grace time)".into(), |s| s.to_string()),
                    last(&self)
                );
                return Err(self.fail(&what, after));
            }
        }
        self.collect_stderr();
        Ok(std::mem::take(&mut self.log))
    }
}

impl Drop for Session {
    fn drop(&mut self) {
        if let Ok(None) = self.child.try_wait() {
            let _ = self.child.kill();
            let _ = self.child.wait();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn requests_carry_every_variable_exactly_and_leave_out_absent_intensities() {
        let obs = BlockStats { signals: 10, n: 7, k: 3, m: 2, e_z: 0.1 + 0.2, e_x: f64::NAN, key_errors: 1, ..Default::default() };
        let params = RuleParams {
            abort_qber: 0.05,
            ec_efficiency: 1.16,
            epsilon_sec: 1e-10,
            epsilon_cor: 1e-300,
            mismatch: 1.0,
            blinding_catch: 1.0,
        };
        let line = request("r", 4, &[(TrialId { point: 2, trial: 9 }, &obs, &params)]);
        assert!(line.ends_with("]}\n") && !line[..line.len() - 1].contains('\n'));
        let v: serde_json::Value = serde_json::from_str(&line).unwrap();
        assert_eq!(v["version"], PROTOCOL_VERSION);
        assert_eq!(v["batch"], 4);
        let b = &v["blocks"][0];
        assert_eq!((b["point"].as_u64(), b["trial"].as_u64(), b["n"].as_u64()), (Some(2), Some(9), Some(7)));
        // Doubles read back bit for bit; a rate without data is null.
        assert_eq!(b["e_z"].as_f64().unwrap().to_bits(), (0.1f64 + 0.2).to_bits());
        assert_eq!(b["eps_cor"].as_f64(), Some(1e-300));
        assert_eq!(b["leak_ec"].as_f64().unwrap().to_bits(), super::super::ec_leak_bits(&obs, &params).to_bits());
        assert!(b["e_x"].is_null());
        assert!(b.get("mu1").is_none(), "a single-photon block has no per-intensity fields");
        assert_eq!(b.as_object().unwrap().len(), 2 + VARIABLES.len() - 27);
    }

    #[test]
    fn bad_program_files_are_reported_key_by_key() {
        let t: toml::Table = "name = \"a b\"\ncommand = []\ntimeout_s = 0\ncolour = 1\n".parse().unwrap();
        let errs = ProgramRule::from_table(&t, "p.toml", Path::new("."), "").unwrap_err();
        let keys: Vec<&str> = errs.iter().filter_map(|e| e.key()).collect();
        assert_eq!(keys, ["colour", "name", "command", "timeout_s"]);
    }
}
