#![no_main]
// Campaign text: parsed and validated (every attack point built), never run.
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        let _ = qkd_audit::audit::Campaign::parse(text, "fuzz", None);
    }
});
