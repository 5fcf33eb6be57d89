use qkd_audit::attack::{Attack, Value};
use qkd_audit::eval::{evaluate, EvalOptions};
use qkd_audit::measures::AccessibleOptions;
use qkd_audit::protocol::Protocol;
fn main() {
    let mut g = std::collections::BTreeMap::new();
    g.insert("kind".to_string(), Value::Text("universal".into()));
    g.insert("qber".to_string(), Value::Num(0.0083777922575786));
    let attack = Attack::builtin("cloner", &g).unwrap();
    for mi in [100, 1000, 5000, 20000, 100000] {
        let t = std::time::Instant::now();
        let opts = EvalOptions { protocol: Protocol::Bb84, accessible: Some(AccessibleOptions { max_iter: mi, random_starts: 0, ..Default::default() }) };
        let r = evaluate(&attack, &opts);
        println!("{mi}: {:?} {:?}", r.map(|e| (e.accessible_z, e.holevo_z, 1.0 - qkd_audit::measures::binary_entropy(e.p_guess_z))), t.elapsed());
    }
}
