#![no_main]
// Setup text, with its source, channel and detector tables.
libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    if let Ok(text) = std::str::from_utf8(data) {
        if let Ok(table) = qkd_audit::input::parse_toml(text) {
            let _ = qkd_audit::audit::setup::Setup::from_table(&table);
        }
    }
});
