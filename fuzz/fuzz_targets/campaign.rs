#![no_main]
// Campaign text: parsed and validated (every attack point built), never run. A rejection
// must carry at least one error, each naming a key or a line.
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        if let Err(errs) = qkd_audit::audit::Campaign::parse_all(text, "fuzz", None) {
            assert!(!errs.is_empty());
            for e in errs {
                assert!(e.key().is_some() || e.location().is_some(), "{e}");
            }
        }
    }
});
