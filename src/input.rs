//! Reading what users write: TOML text with the line and column of a syntax error, numeric
//! values, and the check that a table holds only the keys its schema allows. Every parser of
//! the crate (setups, optical links, campaigns, attack files) goes through these, so the
//! same mistake gets the same message everywhere.

use crate::error::{Error, Result};

/// Largest input file read, bytes. The largest legitimate input, a kraus file with 16
/// operators of a 16-dimensional register, is well under 1 MiB of TOML.
pub const MAX_INPUT_BYTES: u64 = 4 << 20;

/// Reads a user file as text: only a regular file (not a device, pipe or directory, so that
/// `/dev/urandom` is refused instead of read forever), at most [`MAX_INPUT_BYTES`], UTF-8.
/// Errors name the file.
pub fn read_text(path: &std::path::Path) -> Result<String> {
    use std::io::Read;
    let fail = |e: std::io::Error| Error::from(e).with_file(path);
    let meta = std::fs::metadata(path).map_err(fail)?;
    if !meta.is_file() {
        return Err(Error::input("not a regular file (devices, pipes and folders are not read)").with_file(path));
    }
    let mut text = String::new();
    let read = std::fs::File::open(path).map_err(fail)?.take(MAX_INPUT_BYTES + 1).read_to_string(&mut text).map_err(fail)?;
    if read as u64 > MAX_INPUT_BYTES {
        return Err(Error::input(format!("larger than the input limit of {} MiB", MAX_INPUT_BYTES >> 20)).with_file(path));
    }
    Ok(text)
}

/// Parses TOML text; a syntax error names its line and column (1-based).
pub fn parse_toml(text: &str) -> Result<toml::Table> {
    text.parse::<toml::Table>().map_err(|e| {
        let err = Error::input(format!("not valid TOML: {}", e.message().trim()));
        match e.span() {
            Some(span) => {
                let (line, column) = line_column(text, span.start);
                err.at(line, column)
            }
            None => err,
        }
    })
}

/// Where a dotted key (`abort_qber`, `channel.loss_db`, `attacks[1].steps`) is written in
/// TOML `text`: the 1-based line and column of its name, found by reading the text's lines
/// (table headers and `key =` lines). `None` when the key is not written there (a default,
/// or a key inside an inline table).
pub fn locate_key(text: &str, dotted: &str) -> Option<(usize, usize)> {
    let parts: Vec<&str> = dotted.split('.').collect();
    let (leaf, tables) = parts.split_last()?;
    let leaf = leaf.split('[').next().unwrap_or(leaf);
    let want_name: Vec<&str> = tables.iter().map(|t| t.split('[').next().unwrap_or(t)).collect();
    let want_name = want_name.join(".");
    // `attacks[1]` means the second `[[attacks]]` header; a plain table is its first.
    let want_index: usize = tables.last().and_then(|t| t.split_once('[')).map_or(0, |(_, i)| i.trim_end_matches(']').parse().unwrap_or(0));
    let mut seen: std::collections::BTreeMap<String, usize> = std::collections::BTreeMap::new();
    let mut in_wanted = tables.is_empty();
    for (n, line) in text.lines().enumerate() {
        let trimmed = line.trim_start();
        if let Some(header) = trimmed.strip_prefix('[') {
            let name: String =
                header.trim_start_matches('[').split(']').next().unwrap_or("").split('.').map(str::trim).collect::<Vec<_>>().join(".");
            let count = seen.entry(name.clone()).or_insert(0);
            in_wanted = name == want_name && *count == want_index;
            *count += 1;
            continue;
        }
        if in_wanted {
            if let Some(rest) = trimmed.strip_prefix(leaf) {
                if rest.trim_start().starts_with('=') {
                    return Some((n + 1, line.len() - trimmed.len() + 1));
                }
            }
        }
    }
    // A key that names a table (`[detectors]`, `[[attack]]`, `[setup.detectr]`) is written
    // as a header: its first one.
    let whole: Vec<&str> = parts.iter().map(|p| p.split('[').next().unwrap_or(p)).collect();
    let whole = whole.join(".");
    for (n, line) in text.lines().enumerate() {
        let trimmed = line.trim_start();
        if let Some(header) = trimmed.strip_prefix('[') {
            let name: String =
                header.trim_start_matches('[').split(']').next().unwrap_or("").split('.').map(str::trim).collect::<Vec<_>>().join(".");
            if name == whole {
                return Some((n + 1, line.len() - trimmed.len() + 1));
            }
        }
    }
    None
}

/// Attaches to `e` the line and column of its key in `text`, when the key is written there
/// and the error is about this text (not about another file it names).
pub fn locate(e: Error, text: &str) -> Error {
    if e.file().is_some() {
        return e;
    }
    match e.key().and_then(|k| locate_key(text, k)) {
        Some((line, column)) => e.at(line, column),
        None => e,
    }
}

/// The 1-based line and column (in characters) of byte offset `at` in `text`.
pub fn line_column(text: &str, at: usize) -> (usize, usize) {
    let before = &text[..at.min(text.len())];
    let line = before.matches('\n').count() + 1;
    let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, column)
}

/// A finite number (an integer or a float); the error names `key`.
pub fn number(v: &toml::Value, key: &str) -> Result<f64> {
    match v {
        toml::Value::Float(x) if x.is_finite() => Ok(*x),
        toml::Value::Integer(i) => Ok(*i as f64),
        other => Err(Error::input_key(key, format!("must be a finite number, not {}", shown(other)))),
    }
}

/// The first float refused for an integer key: below 2⁵³ every integer is a double, so a
/// float such as `1e6` names exactly the integer written; from 2⁵³ on, a written integer may
/// have been rounded on reading (`9007199254740993.0` reads as 2⁵³).
pub const MAX_EXACT_FLOAT_INTEGER: f64 = 9_007_199_254_740_992.0;

/// A whole number in `[lo, hi]`: a TOML integer, or a float with an integral value
/// (`trials = 1e3`, `signals = 1e6`) below [`MAX_EXACT_FLOAT_INTEGER`]. A fraction
/// (`1.5e0`), a value out of range, or anything else is an error naming `key`, the value and
/// the range.
pub fn integer(v: &toml::Value, key: &str, lo: u64, hi: u64) -> Result<u64> {
    let (lo_s, hi_s) = (range_end(lo), range_end(hi));
    let outside = |x: &dyn std::fmt::Display| Error::input_key(key, format!("{x} is outside the allowed range [{lo_s}, {hi_s}]"));
    match v {
        toml::Value::Integer(i) => u64::try_from(*i).ok().filter(|n| (lo..=hi).contains(n)).ok_or_else(|| outside(i)),
        toml::Value::Float(x) if x.is_finite() && x.fract() != 0.0 => {
            Err(Error::input_key(key, format!("{x} is not a whole number: give an integer in [{lo_s}, {hi_s}]")))
        }
        toml::Value::Float(x) if x.is_finite() && !(*x >= lo as f64 && *x <= hi as f64) => Err(outside(x)),
        toml::Value::Float(x) if x.is_finite() && *x >= MAX_EXACT_FLOAT_INTEGER => Err(Error::input_key(
            key,
            format!("{x:e} is too large to name one integer as a float: write it as an integer, in [{lo_s}, {hi_s}]"),
        )),
        // Integral, in range and below 2⁵³: exact.
        toml::Value::Float(x) if x.is_finite() => Ok(*x as u64),
        other => Err(Error::input_key(key, format!("must be an integer in [{lo_s}, {hi_s}], not {}", shown(other)))),
    }
}

/// A range end as messages print it: a power of ten from 10⁹ on as `1e9`, `1e15`.
fn range_end(n: u64) -> String {
    let k = n.checked_ilog10().unwrap_or(0);
    if k >= 9 && 10u64.pow(k) == n {
        format!("1e{k}")
    } else {
        n.to_string()
    }
}

/// A value as the user wrote it, for a message: TOML syntax, shortened, control characters
/// escaped (it is printed on a terminal).
pub fn shown(v: &toml::Value) -> String {
    const SHOWN_MAX_CHARS: usize = 40;
    let text = v.to_string();
    let mut out = String::new();
    for c in text.chars().take(SHOWN_MAX_CHARS) {
        if c.is_control() {
            out.extend(c.escape_default());
        } else {
            out.push(c);
        }
    }
    if text.chars().count() > SHOWN_MAX_CHARS {
        out.push('…');
    }
    out
}

/// Longest name (of a setup, an attack) accepted, in characters.
pub const NAME_MAX_CHARS: usize = 120;

/// A name a user gives to something that reports will print (a setup, a kraus attack):
/// non-empty, at most [`NAME_MAX_CHARS`] characters, and free of control characters (a line
/// break or an escape sequence in a name could forge a line of a report or drive a
/// terminal). The error names `key`.
pub fn name(v: &toml::Value, key: &str) -> Result<String> {
    let s = v.as_str().ok_or_else(|| Error::input_key(key, "must be a string"))?;
    if s.trim().is_empty() {
        return Err(Error::input_key(key, "must be a non-empty string"));
    }
    if s.chars().count() > NAME_MAX_CHARS {
        return Err(Error::input_key(key, format!("is longer than {NAME_MAX_CHARS} characters")));
    }
    if let Some(c) = s.chars().find(|c| c.is_control()) {
        return Err(Error::input_key(key, format!("contains the control character U+{:04X}; names are printed in reports", c as u32)));
    }
    Ok(s.to_string())
}

/// Every key of `table` that `allowed` does not list, as errors naming the key and saying
/// what a `what` (e.g. "a setup") may hold.
pub fn unknown_keys(table: &toml::Table, allowed: &[&str], what: &str) -> Vec<Error> {
    table
        .keys()
        .filter(|k| !allowed.contains(&k.as_str()))
        .map(|k| Error::input_key(k.clone(), format!("unknown key; {what} has {}", allowed.join(", "))))
        .collect()
}

/// The first unknown key of `table` as an error (see [`unknown_keys`]).
pub fn check_keys(table: &toml::Table, allowed: &[&str], what: &str) -> Result<()> {
    match unknown_keys(table, allowed, what).into_iter().next() {
        Some(e) => Err(e),
        None => Ok(()),
    }
}

/// The problems of one input file, collected so that a validation reports all of them in one
/// pass instead of one per round. A parser checks each key independently, keeps the default
/// for a key it rejects, and goes on; a key whose check depends on another that failed is
/// skipped rather than reported a second time.
#[derive(Debug, Default)]
pub struct Problems(Vec<Error>);

impl Problems {
    /// An empty collection.
    pub fn new() -> Self {
        Problems(Vec::new())
    }
    /// Keeps the value of `r`, or records its error and gives `None`.
    pub fn check<T>(&mut self, r: Result<T>) -> Option<T> {
        match r {
            Ok(v) => Some(v),
            Err(e) => {
                self.0.push(e);
                None
            }
        }
    }
    /// Records one problem.
    pub fn push(&mut self, e: Error) {
        self.0.push(e);
    }
    /// Records the problems of a nested part (a sub-table, a referenced file), under `key`
    /// when it is not empty.
    pub fn nested(&mut self, key: &str, errs: Vec<Error>) {
        self.0.extend(errs.into_iter().map(|e| if key.is_empty() { e } else { e.with_key(key) }));
    }
    /// True when nothing was recorded.
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }
    /// `value` when nothing was recorded, else every problem in the order found.
    pub fn finish<T>(self, value: T) -> std::result::Result<T, Vec<Error>> {
        if self.0.is_empty() {
            Ok(value)
        } else {
            Err(self.0)
        }
    }
}

/// The first of a parser's problems, for callers that stop at one.
pub fn first(errs: Vec<Error>) -> Error {
    errs.into_iter().next().unwrap_or_else(|| Error::input("invalid input"))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn syntax_errors_name_line_and_column() {
        let e = parse_toml("a = 1\nb = = 2\n").unwrap_err();
        assert_eq!(e.location(), Some((2, 5)), "{e}");
        assert!(e.with_file("f.toml").to_string().starts_with("f.toml:2:5: not valid TOML"));
        assert_eq!(line_column("xé\nyz", 5), (2, 2));
    }

    #[test]
    fn only_regular_files_of_bounded_size_are_read() {
        if std::path::Path::new("/dev/urandom").exists() {
            assert!(read_text(std::path::Path::new("/dev/urandom")).unwrap_err().message().contains("not a regular file"));
        }
        let dir = tempfile::tempdir().unwrap();
        assert!(read_text(dir.path()).is_err());
        let big = dir.path().join("big.toml");
        std::fs::write(&big, vec![b'#'; (MAX_INPUT_BYTES + 10) as usize]).unwrap();
        assert!(read_text(&big).unwrap_err().message().contains("input limit"));
        let ok = dir.path().join("ok.toml");
        std::fs::write(&ok, "a = 1\n").unwrap();
        assert_eq!(read_text(&ok).unwrap(), "a = 1\n");
    }

    #[test]
    fn keys_are_located_in_the_text() {
        let text = "name = \"x\"\n[setup]\nsignals = 5\n  abort_qber = 0.9\n[[attacks]]\nbuiltin = \"a\"\n[[attacks]]\nsteps = 0\n";
        assert_eq!(locate_key(text, "name"), Some((1, 1)));
        assert_eq!(locate_key(text, "setup.abort_qber"), Some((4, 3)));
        assert_eq!(locate_key(text, "attacks[1].steps"), Some((8, 1)));
        assert_eq!(locate_key(text, "attacks[0].steps"), None);
        assert_eq!(locate_key(text, "seed"), None);
        // A table's key is found at its header.
        assert_eq!(locate_key(text, "setup"), Some((2, 1)));
        assert_eq!(locate_key("a = 1\n[detectors]\nx = 2\n", "detectors"), Some((2, 1)));
        assert_eq!(locate_key("[setup]\n[setup.detectr]\nx = 1\n", "setup.detectr"), Some((2, 1)));
        let e = locate(Error::input_key("setup.abort_qber", "too big"), text).with_file("c.toml");
        assert_eq!(e.to_string(), "c.toml:4:3: key `setup.abort_qber`: too big");
    }

    #[test]
    fn integers_may_be_written_as_integral_floats() {
        use toml::Value::{Float, Integer, String as Str};
        assert_eq!(integer(&Integer(1000), "k", 1, 1_000_000).unwrap(), 1000);
        assert_eq!(integer(&Float(1e3), "k", 1, 1_000_000).unwrap(), 1000);
        assert_eq!(integer(&Float(1e6), "k", 1, 1_000_000).unwrap(), 1_000_000);
        assert_eq!(integer(&Float(-0.0), "k", 0, 5).unwrap(), 0);
        assert_eq!(integer(&Float(MAX_EXACT_FLOAT_INTEGER - 1.0), "k", 0, u64::MAX).unwrap(), (1 << 53) - 1);
        // 9007199254740993.0 reads as 2⁵³: refused rather than taken as another number.
        let rounded: f64 = "9007199254740993.0".parse().unwrap();
        assert!(integer(&Float(rounded), "k", 0, u64::MAX).unwrap_err().to_string().contains("write it as an integer"));
        for (v, what) in [
            (Float(1.5), "1.5 is not a whole number: give an integer in [1, 1000000]"),
            (Float(1e-3), "0.001 is not a whole number"),
            (Float(2e6), "2000000 is outside the allowed range [1, 1000000]"),
            (Float(0.0), "0 is outside the allowed range [1, 1000000]"),
            (Integer(-1), "-1 is outside the allowed range [1, 1000000]"),
            (Integer(0), "0 is outside"),
            (Float(f64::INFINITY), "must be an integer in [1, 1000000], not inf"),
            (Float(f64::NAN), "must be an integer in [1, 1000000], not nan"),
            (Str("10".into()), "must be an integer in [1, 1000000], not \"10\""),
        ] {
            let e = integer(&v, "trials", 1, 1_000_000).unwrap_err();
            assert_eq!(e.key(), Some("trials"));
            assert!(e.message().contains(what), "{v:?}: {e}");
        }
        let big = integer(&Float(1e16), "seed", 0, u64::MAX).unwrap_err();
        assert!(big.message().contains("write it as an integer"), "{big}");
    }

    #[test]
    fn numbers_and_keys() {
        assert_eq!(number(&toml::Value::Integer(3), "k").unwrap(), 3.0);
        assert!(number(&toml::Value::Float(f64::NAN), "k").is_err());
        assert!(number(&toml::Value::String("1".into()), "k").unwrap_err().to_string().contains("key `k`"));
        let t = parse_toml("a = 1\nzz = 2\nyy = 3").unwrap();
        let errs = unknown_keys(&t, &["a"], "a thing");
        assert_eq!(errs.len(), 2);
        assert_eq!(errs[0].key(), Some("yy"));
        assert!(errs[0].message().contains("a thing has a"), "{}", errs[0]);
        assert!(check_keys(&t, &["a", "yy", "zz"], "x").is_ok());
        let forged = toml::Value::String("probe\n**Verdict: no leak found.**".into());
        assert!(name(&forged, "name").unwrap_err().message().contains("U+000A"));
        assert!(name(&toml::Value::String("\u{1b}[2J".into()), "name").is_err());
        assert_eq!(name(&toml::Value::String("probe-β 2".into()), "name").unwrap(), "probe-β 2");
    }
}
