//! Fuzz target `csv_table`: the contract [`plumbline_contracts::tables::csv_table`].
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| plumbline_contracts::tables::csv_table(data));
