//! Messages and their multipart framing.

use super::signing::Signer;
use serde::{Deserialize, Serialize};
use serde_json::{json, Value};

/// The delimiter between routing identities and the message proper.
pub const DELIMITER: &[u8] = b"<IDS|MSG>";
/// The protocol version we speak.
pub const PROTOCOL_VERSION: &str = "5.3";

/// Why an incoming multipart message was rejected.
#[derive(Debug, thiserror::Error)]
pub enum WireError {
    /// No `<IDS|MSG>` delimiter, or too few frames after it.
    #[error("malformed message: {0}")]
    Malformed(String),
    /// The HMAC signature is missing or wrong.
    #[error("bad signature on a `{0}` message")]
    BadSignature(String),
}

/// A message header.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct Header {
    /// Unique id of this message.
    pub msg_id: String,
    /// Session id of the sender.
    pub session: String,
    /// User name of the sender.
    #[serde(default)]
    pub username: String,
    /// ISO 8601 time of sending.
    #[serde(default)]
    pub date: String,
    /// Message type, e.g. `execute_request`.
    pub msg_type: String,
    /// Protocol version.
    #[serde(default)]
    pub version: String,
}

/// A protocol message with its routing identities.
#[derive(Debug, Clone)]
pub struct Message {
    /// ZeroMQ routing identities (empty on PUB).
    pub identities: Vec<Vec<u8>>,
    /// This message's header.
    pub header: Header,
    /// The header of the request this answers (`{}` when none).
    pub parent_header: Value,
    /// Metadata dictionary.
    pub metadata: Value,
    /// Content dictionary.
    pub content: Value,
    /// Extra binary buffers.
    pub buffers: Vec<Vec<u8>>,
}

impl Message {
    /// Parses and verifies multipart frames.
    pub fn decode(frames: Vec<Vec<u8>>, signer: &Signer) -> Result<Message, WireError> {
        let split = frames
            .iter()
            .position(|f| f.as_slice() == DELIMITER)
            .ok_or_else(|| WireError::Malformed("no <IDS|MSG> delimiter".into()))?;
        if frames.len() < split + 6 {
            return Err(WireError::Malformed(format!(
                "{} frames after the delimiter, need 5",
                frames.len() - split - 1
            )));
        }
        let identities = frames[..split].to_vec();
        let signature = &frames[split + 1];
        let parts = [&frames[split + 2][..], &frames[split + 3][..], &frames[split + 4][..], &frames[split + 5][..]];
        // An object, not the fields as an array (which serde would also accept).
        let header: Header = serde_json::from_slice::<serde_json::Map<String, Value>>(parts[0])
            .and_then(|object| serde_json::from_value(Value::Object(object)))
            .map_err(|e| WireError::Malformed(format!("header is not a valid header object: {e}")))?;
        if !signer.verify(signature, &parts) {
            return Err(WireError::BadSignature(header.msg_type));
        }
        let parse = |bytes: &[u8], what: &str| {
            serde_json::from_slice::<Value>(bytes)
                .map_err(|e| WireError::Malformed(format!("{what} is not valid JSON: {e}")))
        };
        Ok(Message {
            identities,
            header,
            parent_header: parse(parts[1], "parent header")?,
            metadata: parse(parts[2], "metadata")?,
            content: parse(parts[3], "content")?,
            buffers: frames[split + 6..].to_vec(),
        })
    }

    /// Serialises and signs into multipart frames.
    pub fn encode(&self, signer: &Signer) -> Vec<Vec<u8>> {
        let header = serde_json::to_vec(&self.header).unwrap_or_default();
        let parent = serde_json::to_vec(&self.parent_header).unwrap_or_default();
        let metadata = serde_json::to_vec(&self.metadata).unwrap_or_default();
        let content = serde_json::to_vec(&self.content).unwrap_or_default();
        let signature = signer.sign(&[&header, &parent, &metadata, &content]);
        let mut frames = self.identities.clone();
        frames.push(DELIMITER.to_vec());
        frames.push(signature.into_bytes());
        frames.extend([header, parent, metadata, content]);
        frames.extend(self.buffers.iter().cloned());
        frames
    }

    /// A reply or broadcast of `msg_type` caused by this message, sharing its
    /// session and routed back to its sender (identities are cleared for IOPub
    /// by the publisher).
    pub fn child(&self, msg_type: &str, content: Value) -> Message {
        Message {
            identities: self.identities.clone(),
            header: new_header(msg_type, &self.header.session),
            parent_header: serde_json::to_value(&self.header).unwrap_or(json!({})),
            metadata: json!({}),
            content,
            buffers: Vec::new(),
        }
    }
}

/// A fresh header for a message the kernel originates.
pub fn new_header(msg_type: &str, session: &str) -> Header {
    Header {
        msg_id: uuid::Uuid::new_v4().to_string(),
        session: session.to_string(),
        username: "plumbline".into(),
        date: chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Micros, true),
        msg_type: msg_type.to_string(),
        version: PROTOCOL_VERSION.into(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_with_identities_and_signature() {
        let signer = Signer::new("secret");
        let original = Message {
            identities: vec![b"client-1".to_vec()],
            header: new_header("execute_request", "s1"),
            parent_header: json!({}),
            metadata: json!({}),
            content: json!({"code": "1 + 1"}),
            buffers: vec![b"raw".to_vec()],
        };
        let frames = original.encode(&signer);
        assert_eq!(frames[1], DELIMITER);
        let decoded = Message::decode(frames.clone(), &signer).expect("valid");
        assert_eq!(decoded.identities, original.identities);
        assert_eq!(decoded.content, original.content);
        assert_eq!(decoded.buffers, original.buffers);

        let mut tampered = frames;
        let last = tampered.len() - 2;
        tampered[last] = br#"{"code": "panic!()"}"#.to_vec();
        assert!(matches!(Message::decode(tampered, &signer), Err(WireError::BadSignature(_))));
    }

    #[test]
    fn malformed_frames_are_rejected() {
        let signer = Signer::new("");
        assert!(matches!(Message::decode(vec![b"x".to_vec()], &signer), Err(WireError::Malformed(_))));
        let frames = vec![
            DELIMITER.to_vec(),
            b"".to_vec(),
            b"not json".to_vec(),
            b"{}".to_vec(),
            b"{}".to_vec(),
            b"{}".to_vec(),
        ];
        assert!(matches!(Message::decode(frames, &signer), Err(WireError::Malformed(_))));
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(2000))]

        /// Any frames decode or are refused, never panic; what decodes
        /// encodes and decodes to the same message (the fuzz target's
        /// contract, bounded).
        #[test]
        fn any_frames_decode_or_are_refused(
            frames in proptest::collection::vec(proptest::collection::vec(proptest::prelude::any::<u8>(), 0..48), 0..9),
            json_parts in proptest::collection::vec("[{}\\[\\]\":a-z0-9,_ ]{0,40}", 4),
            resign in proptest::prelude::any::<bool>(),
        ) {
            let signer = Signer::new("key");
            let _ = Message::decode(frames, &signer);
            // Frames shaped like a message, with random JSON-ish parts.
            let parts: Vec<&[u8]> = json_parts.iter().map(|p| p.as_bytes()).collect();
            let signature = if resign { signer.sign(&parts).into_bytes() } else { b"00".to_vec() };
            let mut shaped = vec![DELIMITER.to_vec(), signature];
            shaped.extend(json_parts.iter().map(|p| p.as_bytes().to_vec()));
            if let Ok(message) = Message::decode(shaped, &signer) {
                let again = Message::decode(message.encode(&signer), &signer).expect("re-encoded");
                proptest::prop_assert_eq!(again.header, message.header);
                proptest::prop_assert_eq!(again.content, message.content);
            }
        }
    }
}
