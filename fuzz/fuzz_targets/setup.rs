#![no_main]
// Setup text, with its source, channel and detector tables. A rejection must carry at least
// one error, each naming a key or a line.
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        match qkd_audit::input::parse_toml(text) {
            Err(e) => assert!(e.location().is_some(), "{e}"),
            Ok(table) => {
                if let Err(errs) = qkd_audit::audit::setup::Setup::parse_all(&table) {
                    assert!(!errs.is_empty());
                    for e in errs {
                        assert!(e.key().is_some(), "{e}");
                    }
                }
            }
        }
    }
});
