//! Fuzz target `notebook`: the contract [`plumbline_contracts::notebook::notebook`].
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| plumbline_contracts::notebook::notebook(data));
