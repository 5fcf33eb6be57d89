#![no_main]
// `--set KEY=VALUE` lines applied to the intercept-resend family.
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let given: Vec<String> = text.lines().map(str::to_string).collect();
        if let Ok(sets) = qkd_audit::cli::common::parse_sets(&given) {
            let _ = qkd_audit::attack::Attack::builtin("intercept-resend", &sets);
        }
    }
});
