//! The Jupyter messaging protocol on the wire (version 5.3): the connection
//! file, message headers, multipart framing with the `<IDS|MSG>` delimiter,
//! and HMAC-SHA256 signing and verification.

mod connection;
mod message;
mod signing;

pub use connection::{ConnectionError, ConnectionFile};
pub use message::{new_header, Header, Message, WireError, DELIMITER, PROTOCOL_VERSION};
pub use signing::Signer;
