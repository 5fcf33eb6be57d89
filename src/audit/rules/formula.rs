//! Rule files: a key-length formula the user writes, read from TOML, parsed once and
//! evaluated per block.
//!
//! ```toml
//! name = "vendor-finite"                 # shown in tables as file:<name>
//! description = "the vendor's formula"   # optional
//! key_length = "n * (1 - h(abort_qber + mu)) - leak_ec - pa"   # bits, floored
//! abort_if = "e_x > 0.1 || e_z > 0.1"    # optional; default: the setup's abort_qber
//! [[let]]                                # optional named intermediates, in order;
//! name = "mu"                            # each may use the ones before it
//! value = "serfling(n, k, eps_sec / 4)"
//! [[let]]
//! name = "pa"
//! value = "2 * log2(1 / eps_sec)"
//! ```
//! (TOML puts every key after a `[[let]]` header into that entry, so the top-level keys
//! come first.)
//!
//! Expressions: numbers, the variables of [`super::block_vars::VARIABLES`], the `let`
//! names, `+ - * / % ^`, comparisons `< <= > >= == !=`, `&& || !` (true is 1, false 0)
//! and the functions of [`FUNCTIONS`]. All arithmetic is in doubles (`1/2` is 0.5).
//! Parsing is done by the `evalexpr` crate (`evalexpr::build_operator_tree`); its tree is
//! then checked and compiled here into [`Expr`], a tree of doubles with every variable
//! resolved to a slot, so that evaluation allocates nothing and does no name look-ups.
//! Assignments, strings, lists outside a call and unknown names are load-time errors
//! with the file, line and column of the name. Evaluation can neither loop nor do I/O:
//! an expression is a finite tree, evaluated once per block.

use super::block_vars;
use super::{pa_cost_bits, sampling_deviation, verification_bits, BlockStats, RuleParams};
use crate::error::Error;
use crate::input::{line_column, locate_key, Problems};
use crate::quantum::measures::binary_entropy_capped;
use evalexpr::{Node, Operator, Value};

/// Largest number of `[[let]]` intermediates: a rule with more is unreadable, and the
/// evaluation keeps every slot on the stack.
pub const MAX_LETS: usize = 64;

/// Deepest expression tree accepted: the evaluation recurses once per level.
pub const MAX_DEPTH: usize = 200;

/// A function of rule expressions: name, arity, meaning.
pub struct Function {
    /// Name.
    pub name: &'static str,
    /// Number of arguments.
    pub arity: usize,
    /// What it computes.
    pub meaning: &'static str,
}

/// Every function rule expressions may call.
pub const FUNCTIONS: &[Function] = &[
    Function { name: "h", arity: 1, meaning: "binary entropy in bits; 1 for arguments ≥ 1/2 or NaN, h(0) = 0 for arguments ≤ 0" },
    Function { name: "log2", arity: 1, meaning: "logarithm to base 2" },
    Function { name: "ln", arity: 1, meaning: "natural logarithm" },
    Function { name: "log10", arity: 1, meaning: "logarithm to base 10" },
    Function { name: "exp", arity: 1, meaning: "e^x" },
    Function { name: "sqrt", arity: 1, meaning: "square root" },
    Function { name: "abs", arity: 1, meaning: "absolute value" },
    Function { name: "floor", arity: 1, meaning: "largest integer ≤ x" },
    Function { name: "ceil", arity: 1, meaning: "smallest integer ≥ x" },
    Function { name: "min", arity: 2, meaning: "smaller of two" },
    Function { name: "max", arity: 2, meaning: "larger of two" },
    Function { name: "clamp", arity: 3, meaning: "clamp(x, lo, hi): x limited to [lo, hi]" },
    Function { name: "if", arity: 3, meaning: "if(c, a, b): a when c ≠ 0, else b (both are evaluated)" },
    Function { name: "norm_inv", arity: 1, meaning: "inverse of the standard normal CDF: the z with Φ(z) = p" },
    Function {
        name: "serfling",
        arity: 3,
        meaning: "serfling(n, k, eps): the sampling deviation √((n+k)/(nk)·(k+1)/k·ln(1/eps)) of the tool's rules (∞ when n or k is 0)",
    },
    Function {
        name: "binom_upper",
        arity: 3,
        meaning: "binom_upper(x, N, eps): one-sided Clopper–Pearson upper limit on a rate after x successes in N trials: the p with P(Bin(N, p) ≤ x) = eps",
    },
    Function {
        name: "hyper_upper",
        arity: 4,
        meaning: "hyper_upper(sample, rest, observed, eps): upper bound on the errors among `rest` unseen items when a random `sample` showed `observed` (exact hypergeometric tail, as decoy-finite uses)",
    },
    Function { name: "pa_cost", arity: 1, meaning: "pa_cost(eps_pa) = 2·log2(1/(2·eps_pa)), the privacy-amplification cost of the tool's rules" },
    Function { name: "verification", arity: 1, meaning: "verification(eps_cor) = log2(2/eps_cor), the error-verification cost" },
];

/// Binary operations of a compiled expression.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Bin {
    Add,
    Sub,
    Mul,
    Div,
    Rem,
    Pow,
    Eq,
    Ne,
    Gt,
    Lt,
    Ge,
    Le,
    And,
    Or,
}

/// A compiled expression: doubles only, every name resolved.
#[derive(Clone, Debug, PartialEq)]
pub enum Expr {
    /// A number.
    Const(f64),
    /// A variable or `let` slot.
    Slot(usize),
    /// −x.
    Neg(Box<Expr>),
    /// Logical not (1 when x = 0, else 0).
    Not(Box<Expr>),
    /// A binary operation.
    Bin(Bin2),
    /// A function call: index into [`FUNCTIONS`] and arguments.
    Call(usize, Vec<Expr>),
}

/// A binary node (boxed operands).
#[derive(Clone, Debug, PartialEq)]
pub struct Bin2(Bin, Box<Expr>, Box<Expr>);

fn truth(x: bool) -> f64 {
    if x {
        1.0
    } else {
        0.0
    }
}

/// A count argument of a helper: a non-negative integer, or `None`.
fn count(x: f64) -> Option<u64> {
    (x >= 0.0 && x.fract() == 0.0 && x < 9.0e15).then_some(x as u64)
}

/// Width at which [`binom_upper`]'s bisection stops (as `audit::stats`' Beta quantile):
/// far below any digit a key length depends on, above the spacing of doubles near 1.
const BINOM_UPPER_TOL: f64 = 1e-13;

/// One-sided Clopper–Pearson upper limit: the p with P(Bin(N, p) ≤ x) = ε, i.e. the
/// (1 − ε) quantile of Beta(x + 1, N − x) (Clopper & Pearson, Biometrika 26, 404, 1934);
/// 1 when x ≥ N. Bisection on statrs' regularised incomplete beta function.
pub fn binom_upper(x: u64, trials: u64, eps: f64) -> f64 {
    use statrs::distribution::{Beta, ContinuousCDF};
    if !(eps > 0.0 && eps < 1.0) {
        return f64::NAN;
    }
    if x >= trials {
        return 1.0;
    }
    let dist = Beta::new((x + 1) as f64, (trials - x) as f64).expect("positive shape parameters");
    let (mut lo, mut hi) = (0.0_f64, 1.0_f64);
    while hi - lo > BINOM_UPPER_TOL {
        let mid = 0.5 * (lo + hi);
        if dist.cdf(mid) < 1.0 - eps {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

fn call(f: usize, a: &[f64]) -> f64 {
    match FUNCTIONS[f].name {
        "h" => binary_entropy_capped(a[0]),
        "log2" => a[0].log2(),
        "ln" => a[0].ln(),
        "log10" => a[0].log10(),
        "exp" => a[0].exp(),
        "sqrt" => a[0].sqrt(),
        "abs" => a[0].abs(),
        "floor" => a[0].floor(),
        "ceil" => a[0].ceil(),
        "min" => {
            if a[0].is_nan() || a[1].is_nan() {
                f64::NAN
            } else {
                a[0].min(a[1])
            }
        }
        "max" => {
            if a[0].is_nan() || a[1].is_nan() {
                f64::NAN
            } else {
                a[0].max(a[1])
            }
        }
        "clamp" => {
            if a[1] <= a[2] {
                a[0].clamp(a[1], a[2])
            } else {
                f64::NAN
            }
        }
        "if" => {
            if a[0] != 0.0 {
                a[1]
            } else {
                a[2]
            }
        }
        "norm_inv" => {
            use statrs::distribution::{ContinuousCDF, Normal};
            if a[0] > 0.0 && a[0] < 1.0 {
                Normal::new(0.0, 1.0).expect("standard normal").inverse_cdf(a[0])
            } else {
                f64::NAN
            }
        }
        "serfling" => match (count(a[0]), count(a[1])) {
            (Some(n), Some(k)) if a[2] > 0.0 => sampling_deviation(n, k, a[2]),
            _ => f64::NAN,
        },
        "binom_upper" => match (count(a[0]), count(a[1])) {
            (Some(x), Some(n)) => binom_upper(x, n, a[2]),
            _ => f64::NAN,
        },
        "hyper_upper" => match (count(a[0]), count(a[1]), count(a[2])) {
            (Some(s), Some(r), Some(o)) if a[3] > 0.0 && a[3] < 1.0 => {
                super::decoy_finite::hypergeometric_upper_errors(s, r, o, a[3].ln()) as f64
            }
            _ => f64::NAN,
        },
        "pa_cost" => pa_cost_bits(a[0]),
        "verification" => verification_bits(a[0]),
        _ => unreachable!("FUNCTIONS and call agree"),
    }
}

impl Expr {
    /// The value with `slots` holding the variables and the `let` values computed so far.
    pub fn eval(&self, slots: &[f64]) -> f64 {
        match self {
            Expr::Const(x) => *x,
            Expr::Slot(i) => slots[*i],
            Expr::Neg(a) => -a.eval(slots),
            Expr::Not(a) => truth(a.eval(slots) == 0.0),
            Expr::Bin(Bin2(op, a, b)) => {
                let (x, y) = (a.eval(slots), b.eval(slots));
                match op {
                    Bin::Add => x + y,
                    Bin::Sub => x - y,
                    Bin::Mul => x * y,
                    Bin::Div => x / y,
                    Bin::Rem => x % y,
                    Bin::Pow => x.powf(y),
                    Bin::Eq => truth(x == y),
                    Bin::Ne => truth(x != y),
                    Bin::Gt => truth(x > y),
                    Bin::Lt => truth(x < y),
                    Bin::Ge => truth(x >= y),
                    Bin::Le => truth(x <= y),
                    Bin::And => truth(x != 0.0 && y != 0.0),
                    Bin::Or => truth(x != 0.0 || y != 0.0),
                }
            }
            Expr::Call(f, args) => {
                let mut a = [0.0; 4];
                for (slot, e) in a.iter_mut().zip(args) {
                    *slot = e.eval(slots);
                }
                call(*f, &a[..args.len()])
            }
        }
    }
}

/// A problem inside an expression: the message and the byte offset in the expression text
/// it is about (the name at fault), when known.
struct ExprProblem {
    message: String,
    at: Option<usize>,
}

/// Byte offset of `name` as a whole word in `text` (the first occurrence).
fn find_word(text: &str, name: &str) -> Option<usize> {
    let is_word = |c: char| c.is_alphanumeric() || c == '_';
    text.match_indices(name).map(|(i, _)| i).find(|&i| {
        let before = text[..i].chars().next_back();
        let after = text[i + name.len()..].chars().next();
        !before.is_some_and(is_word) && !after.is_some_and(is_word)
    })
}

/// Compiles one evalexpr tree; `names` resolves a variable name to a slot.
fn compile(node: &Node, text: &str, names: &dyn Fn(&str) -> Option<usize>, depth: usize) -> std::result::Result<Expr, ExprProblem> {
    let plain = |m: String| ExprProblem { message: m, at: None };
    if depth > MAX_DEPTH {
        return Err(plain(format!("the expression is nested deeper than {MAX_DEPTH} levels")));
    }
    let kids = node.children();
    let child = |i: usize| match kids.get(i) {
        Some(k) => compile(k, text, names, depth + 1),
        None => Err(ExprProblem { message: format!("`{}` is missing an operand", node.operator()), at: None }),
    };
    let bin = |op: Bin| -> std::result::Result<Expr, ExprProblem> { Ok(Expr::Bin(Bin2(op, Box::new(child(0)?), Box::new(child(1)?)))) };
    match node.operator() {
        Operator::RootNode => match kids.len() {
            1 => child(0),
            0 => Err(plain("empty expression".into())),
            _ => Err(plain("more than one expression".into())),
        },
        Operator::Add => bin(Bin::Add),
        Operator::Sub => bin(Bin::Sub),
        Operator::Mul => bin(Bin::Mul),
        Operator::Div => bin(Bin::Div),
        Operator::Mod => bin(Bin::Rem),
        Operator::Exp => bin(Bin::Pow),
        Operator::Eq => bin(Bin::Eq),
        Operator::Neq => bin(Bin::Ne),
        Operator::Gt => bin(Bin::Gt),
        Operator::Lt => bin(Bin::Lt),
        Operator::Geq => bin(Bin::Ge),
        Operator::Leq => bin(Bin::Le),
        Operator::And => bin(Bin::And),
        Operator::Or => bin(Bin::Or),
        Operator::Neg => Ok(Expr::Neg(Box::new(child(0)?))),
        Operator::Not => Ok(Expr::Not(Box::new(child(0)?))),
        Operator::Const { value } => match value {
            Value::Int(i) => Ok(Expr::Const(*i as f64)),
            Value::Float(x) => Ok(Expr::Const(*x)),
            Value::Boolean(b) => Ok(Expr::Const(truth(*b))),
            other => Err(plain(format!("`{other}` is not a number; expressions compute numbers only"))),
        },
        Operator::VariableIdentifierRead { identifier } => match names(identifier) {
            Some(slot) => Ok(Expr::Slot(slot)),
            None => Err(ExprProblem {
                message: format!(
                    "unknown variable `{identifier}`; the variables are listed in README.md (\"Rule files\"), e.g. n, k, m, e_x, e_z, \
                     key_errors, leak_ec, eps_sec, and the names of earlier [[let]] entries"
                ),
                at: find_word(text, identifier),
            }),
        },
        Operator::FunctionIdentifier { identifier } => {
            let Some(f) = FUNCTIONS.iter().position(|f| f.name == identifier.as_str()) else {
                let names: Vec<&str> = FUNCTIONS.iter().map(|f| f.name).collect();
                return Err(ExprProblem {
                    message: format!("unknown function `{identifier}`; the functions are {}", names.join(", ")),
                    at: find_word(text, identifier),
                });
            };
            // The argument is one expression or a tuple of them (maybe in a root node).
            let Some(mut arg) = kids.first() else {
                return Err(ExprProblem {
                    message: format!("`{identifier}` needs its arguments in parentheses"),
                    at: find_word(text, identifier),
                });
            };
            while matches!(arg.operator(), Operator::RootNode) && arg.children().len() == 1 {
                arg = &arg.children()[0];
            }
            let args: Vec<&Node> = match arg.operator() {
                Operator::Tuple => arg.children().iter().collect(),
                Operator::RootNode if arg.children().is_empty() => Vec::new(),
                _ => vec![arg],
            };
            if args.len() != FUNCTIONS[f].arity {
                return Err(ExprProblem {
                    message: format!(
                        "`{identifier}` takes {} argument(s), not {}: {}",
                        FUNCTIONS[f].arity,
                        args.len(),
                        FUNCTIONS[f].meaning
                    ),
                    at: find_word(text, identifier),
                });
            }
            let args = args.into_iter().map(|a| compile(a, text, names, depth + 1)).collect::<std::result::Result<Vec<_>, _>>()?;
            Ok(Expr::Call(f, args))
        }
        Operator::Tuple => Err(plain("a list of values is not a number (commas belong inside a function call)".into())),
        Operator::Chain => Err(plain("`;` is not allowed: one expression per key (use [[let]] for intermediates)".into())),
        Operator::VariableIdentifierWrite { identifier } => Err(ExprProblem {
            message: "assignments are not allowed in an expression; name intermediates with [[let]]".into(),
            at: find_word(text, identifier),
        }),
        other => Err(plain(format!("`{other}` is not allowed; expressions compute numbers (assignments are not allowed)"))),
    }
}

/// Parses and compiles one expression.
fn parse_expr(text: &str, names: &dyn Fn(&str) -> Option<usize>) -> std::result::Result<Expr, ExprProblem> {
    let tree = evalexpr::build_operator_tree::<evalexpr::DefaultNumericTypes>(text)
        .map_err(|e| ExprProblem { message: format!("not a valid expression: {e}"), at: None })?;
    compile(&tree, text, names, 0)
}

/// A validated rule file.
#[derive(Debug)]
pub struct FormulaRule {
    /// Name (shown as `file:<name>`).
    pub name: String,
    /// Description, if given.
    pub description: String,
    /// Where it came from (the path), for messages.
    pub origin: String,
    /// The rule file's text (hashed into the manifest).
    pub text: String,
    /// The intermediates in order (name, expression); `let` i lives in slot
    /// `block_vars::COUNT + i`.
    pub lets: Vec<(String, Expr)>,
    /// The key length in bits (floored; below 1 gives no key).
    pub key_length: Expr,
    /// The system's own abort condition (nonzero aborts); `None`: the setup's threshold.
    pub abort_if: Option<Expr>,
    /// Highest intensity (1–3) a per-intensity variable of the rule reads, 0 if none.
    pub intensities_read: usize,
}

/// What a formula gives for one block.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FormulaValue {
    /// `abort_if`'s value, when the rule has one: nonzero aborts (NaN is the caller's error).
    pub abort: Option<f64>,
    /// The key length's value in bits before flooring (NaN is the caller's error).
    pub raw_bits: f64,
}

fn slots_used(e: &Expr, out: &mut Vec<usize>) {
    match e {
        Expr::Slot(i) => out.push(*i),
        Expr::Const(_) => {}
        Expr::Neg(a) | Expr::Not(a) => slots_used(a, out),
        Expr::Bin(Bin2(_, a, b)) => {
            slots_used(a, out);
            slots_used(b, out);
        }
        Expr::Call(_, args) => args.iter().for_each(|a| slots_used(a, out)),
    }
}

impl FormulaRule {
    /// Parses a rule file's text; `origin` names it in messages. Every problem is reported,
    /// each at the line and column of the expression's fault in `text` where it can be
    /// found (else at its key).
    pub fn parse_all(text: &str, origin: &str) -> std::result::Result<FormulaRule, Vec<Error>> {
        let t = crate::input::parse_toml(text).map_err(|e| vec![e])?;
        let mut p = Problems::new();
        p.nested("", crate::input::unknown_keys(&t, &["name", "description", "let", "key_length", "abort_if"], "a rule file"));
        let name = match t.get("name") {
            Some(v) => p.check(super::rule_name(v, "name")).unwrap_or_default(),
            None => {
                p.push(Error::input_key("name", "missing: the rule's name"));
                String::new()
            }
        };
        let description = match t.get("description") {
            None => String::new(),
            Some(toml::Value::String(s)) => s.clone(),
            Some(_) => {
                p.push(Error::input_key("description", "must be a string"));
                String::new()
            }
        };
        // Where an expression's fault is in the file: the expression's text is searched
        // for after its key; an escaped string that differs from the text falls back to
        // the key.
        let place = |key: &str, expr: &str, problem: ExprProblem| -> Error {
            let e = Error::input_key(key, problem.message);
            let Some((line, _)) = locate_key(text, key) else { return e };
            let line_start: usize = text.split_inclusive('\n').take(line - 1).map(str::len).sum();
            match text[line_start..].find(expr) {
                Some(i) => {
                    let (l, c) = line_column(text, line_start + i + problem.at.unwrap_or(0));
                    e.at(l, c)
                }
                None => e,
            }
        };
        let mut lets: Vec<(String, Expr)> = Vec::new();
        let mut let_names: Vec<String> = Vec::new();
        match t.get("let") {
            None => {}
            Some(toml::Value::Array(list)) if list.len() <= MAX_LETS => {
                for (i, item) in list.iter().enumerate() {
                    let key = format!("let[{i}]");
                    let Some(table) = item.as_table() else {
                        p.push(Error::input_key(key, "must be a table with `name` and `value`"));
                        continue;
                    };
                    for e in crate::input::unknown_keys(table, &["name", "value"], "a [[let]] entry") {
                        let hint = if matches!(e.key(), Some("key_length" | "abort_if" | "description")) {
                            "; TOML puts every key after a [[let]] header into that entry: write key_length and abort_if above the first [[let]]"
                        } else {
                            ""
                        };
                        p.push(Error::input_key(format!("{key}.{}", e.key().unwrap_or("")), format!("{}{hint}", e.message())));
                    }
                    let lname = match table.get("name").and_then(|v| v.as_str()) {
                        Some(s) if valid_let_name(s) => {
                            if block_vars::slot(s).is_some() || let_names.iter().any(|n| n == s) {
                                p.push(Error::input_key(format!("{key}.name"), format!("`{s}` is already a variable or an earlier let")));
                                None
                            } else {
                                Some(s.to_string())
                            }
                        }
                        _ => {
                            p.push(Error::input_key(
                                format!("{key}.name"),
                                "must be a name of letters, digits and '_' that starts with a letter",
                            ));
                            None
                        }
                    };
                    let value = match table.get("value").and_then(|v| v.as_str()) {
                        Some(s) => {
                            let known = |n: &str| {
                                block_vars::slot(n).or_else(|| let_names.iter().position(|l| l == n).map(|j| block_vars::COUNT + j))
                            };
                            match parse_expr(s, &known) {
                                Ok(e) => Some(e),
                                Err(problem) => {
                                    p.push(place(&format!("{key}.value"), s, problem));
                                    None
                                }
                            }
                        }
                        None => {
                            p.push(Error::input_key(format!("{key}.value"), "missing: the expression, a string"));
                            None
                        }
                    };
                    // A let that failed still names a slot, so later uses are not reported twice.
                    if let Some(n) = lname {
                        let_names.push(n.clone());
                        lets.push((n, value.unwrap_or(Expr::Const(f64::NAN))));
                    }
                }
            }
            Some(_) => p.push(Error::input_key("let", format!("must be a list of at most {MAX_LETS} [[let]] tables"))),
        }
        let known = |n: &str| block_vars::slot(n).or_else(|| let_names.iter().position(|l| l == n).map(|j| block_vars::COUNT + j));
        let mut expr_at = |key: &str, required: bool| -> Option<Expr> {
            match t.get(key) {
                None if required => {
                    p.push(Error::input_key(key, "missing: the key length in bits, an expression (a string)"));
                    None
                }
                None => None,
                Some(toml::Value::String(s)) => match parse_expr(s, &known) {
                    Ok(e) => Some(e),
                    Err(problem) => {
                        p.push(place(key, s, problem));
                        None
                    }
                },
                Some(_) => {
                    p.push(Error::input_key(key, "must be an expression in a string"));
                    None
                }
            }
        };
        let key_length = expr_at("key_length", true);
        let abort_if = expr_at("abort_if", false);
        let Some(key_length) = key_length else {
            return Err(p.finish(()).err().unwrap_or_default());
        };
        let mut used = Vec::new();
        slots_used(&key_length, &mut used);
        abort_if.iter().for_each(|e| slots_used(e, &mut used));
        lets.iter().for_each(|(_, e)| slots_used(e, &mut used));
        let intensities_read =
            used.iter().filter_map(|&s| (s < block_vars::COUNT).then(|| block_vars::intensity_of(s)).flatten()).max().unwrap_or(0);
        p.finish(FormulaRule {
            name,
            description,
            origin: origin.to_string(),
            text: text.to_string(),
            lets,
            key_length,
            abort_if,
            intensities_read,
        })
    }

    /// Reads a rule file's text with every problem located in it and named by `origin`.
    pub fn parse(text: &str, origin: &str) -> std::result::Result<FormulaRule, Vec<Error>> {
        FormulaRule::parse_all(text, origin)
            .map_err(|errs| errs.into_iter().map(|e| crate::input::locate(e, text).with_file(origin)).collect())
    }

    /// Evaluates the rule on one block.
    pub fn eval(&self, obs: &BlockStats, params: &RuleParams) -> FormulaValue {
        let mut slots = [f64::NAN; block_vars::COUNT + MAX_LETS];
        slots[..block_vars::COUNT].copy_from_slice(&block_vars::values(obs, params));
        for (i, (_, e)) in self.lets.iter().enumerate() {
            slots[block_vars::COUNT + i] = e.eval(&slots);
        }
        FormulaValue { abort: self.abort_if.as_ref().map(|e| e.eval(&slots)), raw_bits: self.key_length.eval(&slots) }
    }
}

fn valid_let_name(s: &str) -> bool {
    s.chars().next().is_some_and(|c| c.is_ascii_alphabetic())
        && s.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
        && FUNCTIONS.iter().all(|f| f.name != s)
        && !["true", "false"].contains(&s)
}

/// The rule file used by the tests and the README: `finite-uncertainty` written out with
/// the same pieces, so that it gives the built-in rule's numbers exactly.
pub const FINITE_UNCERTAINTY_EXAMPLE: &str = include_str!("../../../examples/rule-files/finite-uncertainty.toml");

#[cfg(test)]
mod tests {
    use super::*;
    use crate::audit::rules::{finite_uncertainty, KeyRule};

    fn params() -> RuleParams {
        RuleParams { abort_qber: 0.05, ec_efficiency: 1.16, epsilon_sec: 1e-10, epsilon_cor: 1e-12, mismatch: 1.0, blinding_catch: 1.0 }
    }

    #[test]
    fn arithmetic_is_in_doubles_and_precedence_is_the_usual_one() {
        let none = |_: &str| None;
        let e = |s: &str| parse_expr(s, &none).map_err(|p| p.message).unwrap().eval(&[]);
        assert_eq!(e("1/2"), 0.5);
        assert_eq!(e("2 + 3 * 4 ^ 2"), 50.0);
        assert_eq!(e("-2 + 1"), -1.0);
        assert_eq!(e("min(3, max(1, 2))"), 2.0);
        assert_eq!(e("clamp(5, 0, 1)"), 1.0);
        assert_eq!(e("if(1 < 2 && !(3 > 4), 7, 8)"), 7.0);
        assert_eq!(e("log2(8) + ln(1) + sqrt(16)"), 7.0);
        assert_eq!(e("h(0.5) + h(0.7)"), 2.0);
        // Φ⁻¹(0.975) = 1.959964 (common practice).
        assert!((e("norm_inv(0.975)") - 1.959964).abs() < 1e-6);
        // Clopper–Pearson with no successes: 1 − ε^{1/N} (closed form of the Beta quantile).
        assert!((e("binom_upper(0, 10, 0.025)") - (1.0 - 0.025f64.powf(0.1))).abs() < 1e-10);
        assert!(e("serfling(0, 5, 0.1)").is_infinite());
        assert!(e("serfling(1.5, 5, 0.1)").is_nan());
    }

    #[test]
    fn bad_expressions_are_load_errors_at_the_name_at_fault() {
        let text = "name = \"x\"\n[[let]]\nname = \"a\"\nvalue = \"n * 2\"\n[[let]]\nname = \"b\"\nvalue = \"a + bogus\"\n";
        let errs = FormulaRule::parse(&format!("key_length = \"frob(n) + b\"\n{text}"), "r.toml").unwrap_err();
        let shown: Vec<String> = errs.iter().map(|e| e.to_string()).collect();
        assert_eq!(errs.len(), 2, "{shown:?}");
        // `bogus` sits at line 8, column 14 (after `value = "a + `).
        assert!(shown.iter().any(|s| s.starts_with("r.toml:8:14:") && s.contains("unknown variable `bogus`")), "{shown:?}");
        assert!(shown.iter().any(|s| s.starts_with("r.toml:1:15:") && s.contains("unknown function `frob`")), "{shown:?}");
        for (bad, what) in [
            ("key_length = \"n = 3\"", "assignments"),
            ("key_length = \"\\\"s\\\"\"", "not a number"),
            ("key_length = \"min(n)\"", "takes 2 argument"),
            ("key_length = \"n; k\"", "`;`"),
            ("key_length = 5", "string"),
            ("key_length = \"n +\"", "missing an operand"),
            ("key_length = \"(n\"", "valid expression"),
        ] {
            let errs = FormulaRule::parse(&format!("name = \"x\"\n{bad}\n"), "r.toml").unwrap_err();
            assert!(errs[0].to_string().contains(what), "{bad}: {}", errs[0]);
            assert_eq!(errs[0].location().map(|l| l.0), Some(2), "{bad}: {}", errs[0]);
        }
        assert!(FormulaRule::parse("name = \"x\"\n", "r.toml").unwrap_err()[0].to_string().contains("key_length"));
    }

    #[test]
    fn the_written_out_finite_uncertainty_rule_gives_the_built_in_numbers_bit_for_bit() {
        let rule = FormulaRule::parse(FINITE_UNCERTAINTY_EXAMPLE, "finite-uncertainty.toml").unwrap();
        assert!(rule.abort_if.is_some());
        for (n, k, m, ez, ex) in
            [(1_000_000, 100_000, 1, 0.01, 0.01), (5_000, 700, 80, 0.02, 0.03), (90, 12, 0, f64::NAN, 0.0), (10, 1, 1, 0.0, 0.0)]
        {
            let obs = BlockStats { n, k, m, e_z: ez, e_x: ex, ..Default::default() };
            let built_in = finite_uncertainty::length(&obs, &params()).raw_bits;
            assert_eq!(rule.eval(&obs, &params()).raw_bits.to_bits(), built_in.to_bits(), "n={n} k={k}");
            assert_eq!(KeyRule::FiniteUncertainty.length(&obs, &params()).raw_bits, built_in);
        }
    }
}
