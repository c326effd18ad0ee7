//! Fuzz target `round_states`: the contract [`plumbline_contracts::states::round_states`].
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| plumbline_contracts::states::round_states(data));
