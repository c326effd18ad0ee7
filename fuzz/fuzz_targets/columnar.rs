//! Fuzz target `columnar`: the contract [`plumbline_contracts::tables::columnar`].
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| plumbline_contracts::tables::columnar(data));
