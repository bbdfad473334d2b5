//! Message content, decoded in two steps: the envelope first (see [`crate::wire`]), then the
//! content by msg_type into a [`Request`]. Unknown types are kept as [`Request::Unknown`].

use crate::wire::Message;
use serde::Deserialize;
use serde_json::{Map, Value, json};

/// The protocol version spoken.
pub const PROTOCOL_VERSION: &str = "5.3";

/// A request's content.
#[derive(Debug, Clone, PartialEq)]
pub enum Request {
    /// `kernel_info_request`.
    KernelInfo,
    /// `execute_request`.
    Execute(ExecuteRequest),
    /// `complete_request`.
    Complete(CodeAt),
    /// `inspect_request`.
    Inspect(CodeAt),
    /// `is_complete_request`.
    IsComplete(Code),
    /// `history_request`.
    History,
    /// `comm_info_request`.
    CommInfo,
    /// `shutdown_request`.
    Shutdown(Shutdown),
    /// `interrupt_request`.
    Interrupt,
    /// A type this kernel does not handle, or content that does not decode.
    Unknown(String),
}

/// `execute_request` content.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct ExecuteRequest {
    /// The cell source.
    pub code: String,
    /// Run without broadcasting outputs or counting.
    #[serde(default)]
    pub silent: bool,
    /// Count the execution.
    #[serde(default = "yes")]
    pub store_history: bool,
    /// Abort queued execute requests if this one fails.
    #[serde(default = "yes")]
    pub stop_on_error: bool,
}

fn yes() -> bool {
    true
}

/// Code and a cursor position (Unicode code points).
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct CodeAt {
    /// The code.
    pub code: String,
    /// The cursor.
    #[serde(default)]
    pub cursor_pos: usize,
}

/// Code only.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct Code {
    /// The code.
    pub code: String,
}

/// `shutdown_request` content.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct Shutdown {
    /// Whether a restart follows.
    #[serde(default)]
    pub restart: bool,
}

impl Request {
    /// Decodes `m`'s content by its msg_type.
    pub fn decode(m: &Message) -> Request {
        fn de<T: for<'a> Deserialize<'a>>(v: &Value) -> Option<T> {
            serde_json::from_value(v.clone()).ok()
        }
        let c = &m.content;
        let t = m.msg_type();
        let r = match t {
            "kernel_info_request" => Some(Request::KernelInfo),
            "execute_request" => de(c).map(Request::Execute),
            "complete_request" => de(c).map(Request::Complete),
            "inspect_request" => de(c).map(Request::Inspect),
            "is_complete_request" => de(c).map(Request::IsComplete),
            "history_request" => Some(Request::History),
            "comm_info_request" => Some(Request::CommInfo),
            "shutdown_request" => de(c).map(Request::Shutdown),
            "interrupt_request" => Some(Request::Interrupt),
            _ => None,
        };
        r.unwrap_or_else(|| Request::Unknown(t.to_string()))
    }
}

/// Builds outgoing messages for one kernel session.
#[derive(Debug, Clone)]
pub struct Replier {
    /// The kernel's session id.
    pub session: String,
}

impl Replier {
    /// A new session id.
    pub fn new() -> Replier {
        Replier {
            session: uuid::Uuid::new_v4().to_string(),
        }
    }

    fn header(&self, msg_type: &str) -> Map<String, Value> {
        let Value::Object(h) = json!({
            "msg_id": uuid::Uuid::new_v4().to_string(),
            "session": self.session,
            "username": "partita",
            "date": chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Micros, true),
            "msg_type": msg_type,
            "version": PROTOCOL_VERSION,
        }) else {
            unreachable!()
        };
        h
    }

    /// A reply to `parent`: same identities, parent header set.
    pub fn reply_to(&self, parent: &Message, msg_type: &str, content: Value) -> Message {
        Message {
            identities: parent.identities.clone(),
            header: self.header(msg_type),
            parent_header: parent.header.clone(),
            metadata: Map::new(),
            content,
            buffers: Vec::new(),
        }
    }

    /// An IOPub message caused by `parent` (no identities; the topic is the msg_type).
    pub fn broadcast(&self, parent: Option<&Message>, msg_type: &str, content: Value) -> Message {
        Message {
            identities: vec![format!("kernel.{}.{msg_type}", self.session).into_bytes()],
            header: self.header(msg_type),
            parent_header: parent.map(|p| p.header.clone()).unwrap_or_default(),
            metadata: Map::new(),
            content,
            buffers: Vec::new(),
        }
    }
}

impl Default for Replier {
    fn default() -> Self {
        Replier::new()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn with(msg_type: &str, content: Value) -> Message {
        let Value::Object(header) =
            json!({"msg_id": "m1", "msg_type": msg_type, "session": "client"})
        else {
            unreachable!()
        };
        Message {
            identities: vec![b"id".to_vec()],
            header,
            parent_header: Map::new(),
            metadata: Map::new(),
            content,
            buffers: vec![],
        }
    }

    #[test]
    fn decodes_by_type_with_defaults() {
        let r = Request::decode(&with("execute_request", json!({"code": "help"})));
        assert_eq!(
            r,
            Request::Execute(ExecuteRequest {
                code: "help".into(),
                silent: false,
                store_history: true,
                stop_on_error: true
            })
        );
        assert_eq!(
            Request::decode(&with("shutdown_request", json!({"restart": true}))),
            Request::Shutdown(Shutdown { restart: true })
        );
        assert_eq!(
            Request::decode(&with("bogus_request", json!({}))),
            Request::Unknown("bogus_request".into())
        );
        // Content that does not fit its type is kept as unknown rather than failing.
        assert_eq!(
            Request::decode(&with("execute_request", json!({"code": 5}))),
            Request::Unknown("execute_request".into())
        );
    }

    #[test]
    fn reply_sets_parent_session_and_identities() {
        let r = Replier::new();
        let p = with("kernel_info_request", json!({}));
        let m = r.reply_to(&p, "kernel_info_reply", json!({"status": "ok"}));
        assert_eq!(m.identities, p.identities);
        assert_eq!(m.parent_header["msg_id"], "m1");
        assert_eq!(m.header["session"], Value::String(r.session.clone()));
        assert_eq!(m.header["version"], "5.3");
        assert_eq!(m.msg_type(), "kernel_info_reply");
    }
}
