//! Contract of the kernel's wire layer: frames and signatures.
//!
//! Any list of frames decodes to a message or a [`plumbline_kernel::wire::WireError`] with a reason,
//! under the session key and under no key; a message that decodes encodes
//! and decodes again to the same message. Half of the inputs are re-signed
//! with the session key before decoding, so that the fuzzer also reaches the
//! JSON parsing behind the signature check.

use arbitrary::{Arbitrary, Unstructured};
use plumbline_kernel::wire::{Message, Signer, DELIMITER};

const KEY: &str = "fuzzing-key";

/// Cuts `data` into a re-sign flag and frames, as libFuzzer's structured
/// inputs do, and decodes them.
pub fn wire_frames(data: &[u8]) {
    let Ok((resign, mut frames)) = <(bool, Vec<Vec<u8>>)>::arbitrary_take_rest(Unstructured::new(data)) else {
        return;
    };
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
        match Message::decode(frames.clone(), &signer) {
            Err(error) => assert!(!error.to_string().is_empty(), "a frame list was refused without a reason"),
            Ok(message) => {
                let again = Message::decode(message.encode(&signer), &signer)
                    .unwrap_or_else(|e| panic!("an encoded message does not decode: {e}"));
                assert_eq!(again.header, message.header);
                assert_eq!(again.content, message.content);
                assert_eq!(again.identities, message.identities);
            }
        }
    }
}
