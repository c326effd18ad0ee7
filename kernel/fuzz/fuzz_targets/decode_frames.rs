//! Fuzzes the kernel's frame parser and signature check: any list of frames
//! must decode to a message or a `WireError`, never panic; a message that
//! decodes must encode and decode again to the same message.
//!
//! Half of the inputs are re-signed with the session key before decoding, so
//! the fuzzer also reaches the JSON parsing behind the signature check.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[allow(dead_code, unused_imports)]
#[path = "../../src/wire/mod.rs"]
mod wire;

use wire::{Message, Signer, DELIMITER};

const KEY: &str = "fuzzing-key";

fuzz_target!(|input: (bool, Vec<Vec<u8>>)| {
    let (resign, mut frames) = input;
    let signer = Signer::new(KEY);
    if resign {
        if let Some(split) = frames.iter().position(|f| f.as_slice() == DELIMITER) {
            if frames.len() >= split + 6 {
                let parts: Vec<&[u8]> = frames[split + 2..split + 6].iter().map(Vec::as_slice).collect();
                frames[split + 1] = signer.sign(&parts).into_bytes();
            }
        }
    }
    for signer in [signer, Signer::new("")] {
        if let Ok(message) = Message::decode(frames.clone(), &signer) {
            let again = Message::decode(message.encode(&signer), &signer).expect("an encoded message decodes");
            assert_eq!(again.header, message.header);
            assert_eq!(again.content, message.content);
            assert_eq!(again.identities, message.identities);
        }
    }
});
