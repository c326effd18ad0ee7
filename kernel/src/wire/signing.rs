//! HMAC-SHA256 signatures of messages (RFC 2104 via the `hmac` crate), with a
//! constant-time check of incoming signatures.

use hmac::{Hmac, KeyInit, Mac};
use sha2::Sha256;

/// Signs and verifies message frames with the session key.
#[derive(Clone)]
pub struct Signer {
    key: Option<Vec<u8>>,
}

impl std::fmt::Debug for Signer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(if self.key.is_some() { "Signer(hmac-sha256)" } else { "Signer(unsigned)" })
    }
}

impl Signer {
    /// A signer for `key`; an empty key means no signing, as the protocol says.
    pub fn new(key: &str) -> Self {
        Self { key: (!key.is_empty()).then(|| key.as_bytes().to_vec()) }
    }

    fn mac(&self, parts: &[&[u8]]) -> Option<Hmac<Sha256>> {
        let key = self.key.as_ref()?;
        let mut mac = <Hmac<Sha256> as KeyInit>::new_from_slice(key).ok()?;
        for p in parts {
            mac.update(p);
        }
        Some(mac)
    }

    /// Lower-case hex signature over header, parent header, metadata and content.
    pub fn sign(&self, parts: &[&[u8]]) -> String {
        match self.mac(parts) {
            None => String::new(),
            Some(mac) => mac.finalize().into_bytes().iter().map(|b| format!("{b:02x}")).collect(),
        }
    }

    /// Whether `signature` is right for `parts`, compared in constant time.
    pub fn verify(&self, signature: &[u8], parts: &[&[u8]]) -> bool {
        match self.mac(parts) {
            None => true,
            Some(mac) => {
                let Some(bytes) = decode_hex(signature) else { return false };
                mac.verify_slice(&bytes).is_ok()
            }
        }
    }
}

fn decode_hex(text: &[u8]) -> Option<Vec<u8>> {
    if !text.len().is_multiple_of(2) {
        return None;
    }
    text.chunks(2)
        .map(|pair| {
            let digit = |c: u8| (c as char).to_digit(16);
            Some((digit(pair[0])? * 16 + digit(pair[1])?) as u8)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    // RFC 4231 test case 2: key "Jefe", data "what do ya want for nothing?".
    #[test]
    fn matches_rfc_4231_case_2() {
        let signer = Signer::new("Jefe");
        assert_eq!(
            signer.sign(&[b"what do ya want ", b"for nothing?"]),
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
        );
        assert!(signer.verify(
            b"5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843",
            &[b"what do ya want for nothing?"]
        ));
        assert!(!signer.verify(
            b"5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3844",
            &[b"what do ya want for nothing?"]
        ));
        assert!(!signer.verify(b"zz", &[b"x"]));
    }

    #[test]
    fn empty_key_means_unsigned() {
        let signer = Signer::new("");
        assert_eq!(signer.sign(&[b"anything"]), "");
        assert!(signer.verify(b"", &[b"anything"]));
    }
}
