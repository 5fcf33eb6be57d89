#![no_main]
// `--set KEY=VALUE` lines applied to the intercept-resend family. A rejection must name the
// key at fault.
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let given: Vec<String> = text.lines().map(str::to_string).collect();
        match qkd_audit::cli::common::parse_sets(&given) {
            Err(e) => assert!(e.key().is_some(), "{e}"),
            Ok(sets) => {
                if let Err(e) = qkd_audit::attack::Attack::builtin("intercept-resend", &sets) {
                    assert!(e.key().is_some() || e.location().is_some(), "{e}");
                }
            }
        }
    }
});
