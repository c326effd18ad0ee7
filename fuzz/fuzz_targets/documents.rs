//! Fuzz target `documents`: the contract [`plumbline_contracts::documents::documents`].
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| plumbline_contracts::documents::documents(data));
