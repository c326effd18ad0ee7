//! Fuzz target `wire_frames`: the contract [`plumbline_contracts::wire::wire_frames`].
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| plumbline_contracts::wire::wire_frames(data));
