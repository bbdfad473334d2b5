//! Frames ↔ messages, signing and verification. No I/O.
//!
//! A message on the wire is `[identities…, "<IDS|MSG>", signature, header, parent_header,
//! metadata, content, buffers…]`. Incoming frames are checked in this order: the delimiter is
//! found, at least the four JSON frames follow the signature, the HMAC-SHA256 over exactly the
//! four received JSON frames is verified in constant time — and only then is any JSON parsed.
//! Signing covers the same four frames and never the buffers. A signed message whose
//! signature was already seen in this session is a replay and is dropped, as the protocol's
//! reference implementation does; the memory of signatures is bounded ([`REPLAY_MEMORY`]).

use hmac::{Hmac, KeyInit, Mac};
use serde_json::{Map, Value};
use sha2::Sha256;
use std::collections::{HashSet, VecDeque};
use std::sync::{Arc, Mutex};

/// How many recent signatures are remembered to refuse replays. A replay of a message older
/// than this many messages is not detected; 65,536 signatures take about 6 MiB.
pub const REPLAY_MEMORY: usize = 65_536;

/// The delimiter between routing identities and the message.
pub const DELIMITER: &[u8] = b"<IDS|MSG>";

/// Why incoming frames were dropped.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum WireError {
    /// No `<IDS|MSG>` frame.
    NoDelimiter,
    /// Fewer than signature + four JSON frames after the delimiter.
    TooFewFrames(usize),
    /// The signature does not match (or is missing).
    BadSignature,
    /// The signature was already seen: the same signed message sent again.
    Replayed,
    /// A JSON frame does not parse, or the header lacks msg_type.
    BadJson(String),
}

impl std::fmt::Display for WireError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            WireError::NoDelimiter => write!(f, "no <IDS|MSG> delimiter"),
            WireError::TooFewFrames(n) => write!(f, "only {n} frames after the delimiter (need 5)"),
            WireError::BadSignature => write!(f, "bad or missing signature"),
            WireError::Replayed => write!(f, "a signature already seen (a replayed message)"),
            WireError::BadJson(e) => write!(f, "malformed JSON: {e}"),
        }
    }
}

/// A decoded message.
#[derive(Debug, Clone, PartialEq)]
pub struct Message {
    /// Routing identities (ROUTER sockets).
    pub identities: Vec<Vec<u8>>,
    /// The header object.
    pub header: Map<String, Value>,
    /// The parent header object (empty if none).
    pub parent_header: Map<String, Value>,
    /// Metadata.
    pub metadata: Map<String, Value>,
    /// Content.
    pub content: Value,
    /// Binary buffers.
    pub buffers: Vec<Vec<u8>>,
}

impl Message {
    /// The header's msg_type.
    pub fn msg_type(&self) -> &str {
        self.header
            .get("msg_type")
            .and_then(Value::as_str)
            .unwrap_or("")
    }
    /// The header's msg_id.
    pub fn msg_id(&self) -> &str {
        self.header
            .get("msg_id")
            .and_then(Value::as_str)
            .unwrap_or("")
    }
}

/// The signatures seen recently (oldest forgotten first).
#[derive(Default)]
struct Seen {
    set: HashSet<Vec<u8>>,
    order: VecDeque<Vec<u8>>,
}

impl Seen {
    /// Records `sig`; false if it was already there.
    fn first_time(&mut self, sig: &[u8]) -> bool {
        if self.set.contains(sig) {
            return false;
        }
        if self.order.len() == REPLAY_MEMORY {
            if let Some(old) = self.order.pop_front() {
                self.set.remove(&old);
            }
        }
        self.set.insert(sig.to_vec());
        self.order.push_back(sig.to_vec());
        true
    }
}

/// Signs and verifies with one key. Clones share the memory of seen signatures, so a message
/// replayed on another channel is refused too.
#[derive(Clone)]
pub struct Signer {
    key: Vec<u8>,
    seen: Arc<Mutex<Seen>>,
}

impl Signer {
    /// A signer for `key`; an empty key means unsigned messages.
    pub fn new(key: &str) -> Signer {
        Signer {
            key: key.as_bytes().to_vec(),
            seen: Arc::default(),
        }
    }

    /// Whether messages are signed (the key is not empty).
    pub fn is_signed(&self) -> bool {
        !self.key.is_empty()
    }

    fn mac(&self) -> Option<Hmac<Sha256>> {
        if self.key.is_empty() {
            None
        } else {
            Hmac::<Sha256>::new_from_slice(&self.key).ok()
        }
    }

    /// The hex signature of four JSON frames ("" when unsigned).
    pub fn sign(&self, parts: [&[u8]; 4]) -> String {
        match self.mac() {
            None => String::new(),
            Some(mut m) => {
                for p in parts {
                    m.update(p);
                }
                hex::encode(m.finalize().into_bytes())
            }
        }
    }

    /// Constant-time check of `signature` (hex) over four frames.
    pub fn verify(&self, signature: &[u8], parts: [&[u8]; 4]) -> bool {
        match self.mac() {
            None => true,
            Some(mut m) => {
                let Ok(sig) = hex::decode(signature) else {
                    return false;
                };
                for p in parts {
                    m.update(p);
                }
                m.verify_slice(&sig).is_ok()
            }
        }
    }

    /// Verifies, then parses, incoming frames.
    pub fn decode(&self, frames: &[Vec<u8>]) -> Result<Message, WireError> {
        let d = frames
            .iter()
            .position(|f| f.as_slice() == DELIMITER)
            .ok_or(WireError::NoDelimiter)?;
        let rest = &frames[d + 1..];
        if rest.len() < 5 {
            return Err(WireError::TooFewFrames(rest.len()));
        }
        let parts = [
            rest[1].as_slice(),
            rest[2].as_slice(),
            rest[3].as_slice(),
            rest[4].as_slice(),
        ];
        if !self.verify(&rest[0], parts) {
            return Err(WireError::BadSignature);
        }
        if self.is_signed() {
            let mut seen = self.seen.lock().unwrap_or_else(|p| p.into_inner());
            if !seen.first_time(&rest[0]) {
                return Err(WireError::Replayed);
            }
        }
        let obj = |b: &[u8], what: &str| -> Result<Map<String, Value>, WireError> {
            match serde_json::from_slice::<Value>(b) {
                Ok(Value::Object(m)) => Ok(m),
                Ok(_) => Err(WireError::BadJson(format!("{what} is not an object"))),
                Err(e) => Err(WireError::BadJson(format!("{what}: {e}"))),
            }
        };
        let header = obj(parts[0], "header")?;
        if !header.get("msg_type").is_some_and(Value::is_string) {
            return Err(WireError::BadJson("header has no msg_type".into()));
        }
        let parent_header = obj(parts[1], "parent_header")?;
        let metadata = obj(parts[2], "metadata")?;
        let content = Value::Object(obj(parts[3], "content")?);
        Ok(Message {
            identities: frames[..d].to_vec(),
            header,
            parent_header,
            metadata,
            content,
            buffers: rest[5..].to_vec(),
        })
    }

    /// Serialises and signs a message into frames.
    pub fn encode(&self, m: &Message) -> Vec<Vec<u8>> {
        let h = serde_json::to_vec(&m.header).unwrap_or_default();
        let p = serde_json::to_vec(&m.parent_header).unwrap_or_default();
        let md = serde_json::to_vec(&m.metadata).unwrap_or_default();
        let c = serde_json::to_vec(&m.content).unwrap_or_default();
        let sig = self.sign([&h, &p, &md, &c]);
        let mut frames = m.identities.clone();
        frames.push(DELIMITER.to_vec());
        frames.push(sig.into_bytes());
        frames.extend([h, p, md, c]);
        frames.extend(m.buffers.iter().cloned());
        frames
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn msg() -> Message {
        let Value::Object(header) = json!({"msg_id": "1", "msg_type": "execute_request", "session": "s",
            "username": "u", "date": "2026-01-01T00:00:00Z", "version": "5.3"})
        else {
            unreachable!()
        };
        Message {
            identities: vec![b"peer".to_vec()],
            header,
            parent_header: Map::new(),
            metadata: Map::new(),
            content: json!({"code": "help"}),
            buffers: vec![b"\x00\x01binary".to_vec()],
        }
    }

    #[test]
    fn sign_verify_round_trip_with_buffers() {
        let s = Signer::new("secret");
        let frames = s.encode(&msg());
        assert_eq!(s.decode(&frames).unwrap(), msg());
    }

    #[test]
    fn a_replayed_message_is_dropped_on_every_clone() {
        let s = Signer::new("secret");
        let frames = s.encode(&msg());
        assert!(s.decode(&frames).is_ok());
        assert_eq!(s.decode(&frames), Err(WireError::Replayed));
        assert_eq!(s.clone().decode(&frames), Err(WireError::Replayed));
        // A forged copy is refused for its signature and does not enter the memory.
        let mut forged = frames.clone();
        let d = forged.iter().position(|f| f == DELIMITER).unwrap();
        forged[d + 1] = b"00".to_vec();
        assert_eq!(s.decode(&forged), Err(WireError::BadSignature));
    }

    #[test]
    fn the_memory_of_signatures_is_bounded() {
        let mut seen = Seen::default();
        for i in 0..REPLAY_MEMORY + 10 {
            assert!(seen.first_time(&i.to_le_bytes()));
        }
        assert_eq!(seen.set.len(), REPLAY_MEMORY);
        assert_eq!(seen.order.len(), REPLAY_MEMORY);
        // The oldest were forgotten; the newest are still refused.
        assert!(seen.first_time(&0usize.to_le_bytes()));
        assert!(!seen.first_time(&(REPLAY_MEMORY + 9).to_le_bytes()));
    }

    #[test]
    fn known_signature() {
        // HMAC-SHA256 test vector (RFC 4231, test case 2): key "Jefe",
        // data "what do ya want for nothing?" split over four frames.
        let s = Signer::new("Jefe");
        assert_eq!(
            s.sign([b"what do ya", b" want ", b"for ", b"nothing?"]),
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
        );
    }

    #[test]
    fn forged_or_missing_signature_is_dropped() {
        let s = Signer::new("secret");
        let mut frames = s.encode(&msg());
        let d = frames.iter().position(|f| f == DELIMITER).unwrap();
        frames[d + 1] = Signer::new("other").sign([b"", b"", b"", b""]).into_bytes();
        assert_eq!(s.decode(&frames), Err(WireError::BadSignature));
        frames[d + 1] = Vec::new();
        assert_eq!(s.decode(&frames), Err(WireError::BadSignature));
        // A valid signature over different content also fails.
        let mut frames = s.encode(&msg());
        frames[d + 5] = br#"{"code": "other"}"#.to_vec();
        assert_eq!(s.decode(&frames), Err(WireError::BadSignature));
    }

    #[test]
    fn too_few_frames_and_no_delimiter_are_dropped() {
        let s = Signer::new("secret");
        let frames = s.encode(&msg());
        assert_eq!(s.decode(&frames[..5]), Err(WireError::TooFewFrames(3)));
        assert_eq!(s.decode(&[b"x".to_vec()]), Err(WireError::NoDelimiter));
    }

    #[test]
    fn malformed_json_is_dropped_after_verification() {
        let s = Signer::new("");
        let frames = vec![
            DELIMITER.to_vec(),
            vec![],
            b"{".to_vec(),
            b"{}".to_vec(),
            b"{}".to_vec(),
            b"{}".to_vec(),
        ];
        assert!(matches!(s.decode(&frames), Err(WireError::BadJson(_))));
        let frames = vec![
            DELIMITER.to_vec(),
            vec![],
            b"{}".to_vec(),
            b"{}".to_vec(),
            b"{}".to_vec(),
            b"{}".to_vec(),
        ];
        assert!(matches!(s.decode(&frames), Err(WireError::BadJson(_))));
    }

    #[test]
    fn unsigned_when_key_is_empty() {
        let s = Signer::new("");
        let frames = s.encode(&msg());
        assert_eq!(frames[2], b"");
        assert!(s.decode(&frames).is_ok());
    }
}
