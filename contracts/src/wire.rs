//! Contract of the kernel's wire layer: frames and signatures.
//!
//! Any list of frames decodes to a message or a [`plumbline_kernel::wire::WireError`] with a reason,
//! under the session key and under no key; a message that decodes encodes
//! and decodes again to the same message. Half of the inputs are re-signed
//! with the session key before decoding, so that the fuzzer also reaches the
//! JSON parsing behind the signature check.
//!
//! The input is cut into frames by [`frames_of`]: a first byte whose lowest
//! bit asks for re-signing, then frames each written as a 16-bit
//! little-endian length and that many bytes (the last frame takes what is
//! left). Simple enough that seeds are written by hand
//! (`fuzz/seed_corpus.py`).

use plumbline_kernel::wire::{Message, Signer, DELIMITER};

const KEY: &str = "fuzzing-key";

/// Cuts `data` into a re-sign flag and frames ([`frames_of`]) and decodes them.
pub fn wire_frames(data: &[u8]) {
    let Some((resign, mut frames)) = frames_of(data) else { return };
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

/// The re-sign flag and the frames of `data` (module documentation); `None`
/// for empty input.
pub fn frames_of(data: &[u8]) -> Option<(bool, Vec<Vec<u8>>)> {
    let (&flag, mut rest) = data.split_first()?;
    let mut frames = Vec::new();
    while !rest.is_empty() {
        let (frame, after) = match rest {
            [low, high, body @ ..] => {
                let length = usize::from(u16::from_le_bytes([*low, *high])).min(body.len());
                body.split_at(length)
            }
            short => (short, &[][..]),
        };
        frames.push(frame.to_vec());
        rest = after;
    }
    Some((flag & 1 == 1, frames))
}
