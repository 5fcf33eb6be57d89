#![no_main]
// A catalogue entry or a kraus file, parsed and built with its defaults. A rejection must
// carry at least one error, each naming a key or a line.
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        match qkd_audit::attack::file::parse(text) {
            Err(errs) => {
                assert!(!errs.is_empty());
                for e in errs {
                    assert!(e.key().is_some() || e.location().is_some(), "{e}");
                }
            }
            Ok(file) => {
                if let Err(e) = file.build(&Default::default()) {
                    assert!(e.key().is_some() || e.location().is_some(), "{e}");
                }
            }
        }
    }
});
