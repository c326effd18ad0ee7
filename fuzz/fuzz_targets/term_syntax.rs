//! Fuzz target `term_syntax`: the contract [`plumbline_contracts::terms::term_syntax`].
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| plumbline_contracts::terms::term_syntax(data));
