#![no_main]
// A catalogue entry or a kraus file, parsed and built with its defaults.
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        if let Ok(file) = qkd_audit::attack::file::parse(text) {
            let _ = file.build(&Default::default());
        }
    }
});
