//! Fuzz target `workbook`: the contract [`plumbline_contracts::tables::workbook`].
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| plumbline_contracts::tables::workbook(data));
