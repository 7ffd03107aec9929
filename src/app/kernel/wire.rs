//! The messages of the Jupyter protocol (version 5.x) as they travel over
//! ZeroMQ: the connection file, headers, HMAC-SHA256 signatures, and the
//! multipart framing `identities… <IDS|MSG> signature header parent
//! metadata content buffers…`.
//!
//! Sockets live in `server`; what the messages mean lives in `cell`.
//! Nothing here blocks or does I/O besides reading the connection file.

use std::path::Path;

use bytes::Bytes;
use hmac::{Hmac, Mac};
use serde::{Deserialize, Serialize};
use serde_json::{json, Value as Json};
use sha2::Sha256;
use zeromq::ZmqMessage;

/// The protocol version the kernel speaks.
pub(crate) const PROTOCOL_VERSION: &str = "5.3";

/// The frame that separates routing identities from the message.
pub(crate) const DELIMITER: &[u8] = b"<IDS|MSG>";

/// The connection file Jupyter writes before it starts the kernel.
#[derive(Clone, Debug, Deserialize)]
pub(crate) struct Connection {
    /// `tcp` (the only transport the kernel binds).
    #[serde(default = "tcp")]
    pub transport: String,
    /// The address to bind, e.g. `127.0.0.1`.
    pub ip: String,
    /// The request/reply channel of executions and queries.
    pub shell_port: u16,
    /// Published outputs and status.
    pub iopub_port: u16,
    /// Input requests (the kernel never asks for input).
    pub stdin_port: u16,
    /// Interrupts and shutdown, answered even while a cell runs.
    pub control_port: u16,
    /// Heartbeat echo.
    pub hb_port: u16,
    /// The signing key (empty: messages are not signed).
    #[serde(default)]
    pub key: String,
    /// `hmac-sha256` (the only scheme accepted).
    #[serde(default = "hmac_sha256")]
    pub signature_scheme: String,
}

fn tcp() -> String {
    "tcp".to_string()
}

fn hmac_sha256() -> String {
    "hmac-sha256".to_string()
}

impl Connection {
    /// Reads and checks a connection file.
    pub(crate) fn read(path: &Path) -> Result<Connection, String> {
        let text = std::fs::read_to_string(path)
            .map_err(|e| format!("cannot read the connection file {}: {e}", path.display()))?;
        Connection::parse(&text).map_err(|e| format!("the connection file {} {e}", path.display()))
    }

    /// Parses and checks the JSON of a connection file.
    pub(crate) fn parse(text: &str) -> Result<Connection, String> {
        let c: Connection = serde_json::from_str(text).map_err(|e| format!("is not valid: {e}"))?;
        if c.transport != "tcp" {
            return Err(format!(
                "asks for the transport `{}`; the kernel binds `tcp` only",
                c.transport
            ));
        }
        if c.signature_scheme != "hmac-sha256" {
            return Err(format!(
                "asks for the signature scheme `{}`; the kernel signs with `hmac-sha256` only",
                c.signature_scheme
            ));
        }
        Ok(c)
    }

    /// The endpoint of a port, e.g. `tcp://127.0.0.1:5555`.
    pub(crate) fn endpoint(&self, port: u16) -> String {
        format!("{}://{}:{}", self.transport, self.ip, port)
    }
}

/// Signs and verifies messages with the connection's key.
#[derive(Clone)]
pub(crate) struct Signer {
    /// `None` when the key is empty (signatures are then empty).
    mac: Option<Hmac<Sha256>>,
}

impl Signer {
    /// A signer for `key` (HMAC-SHA256; an empty key signs nothing).
    pub(crate) fn new(key: &[u8]) -> Signer {
        let mac = if key.is_empty() {
            None
        } else {
            // HMAC takes keys of any length.
            Hmac::<Sha256>::new_from_slice(key).ok()
        };
        Signer { mac }
    }

    fn mac_of(&self, parts: &[&[u8]]) -> Option<Hmac<Sha256>> {
        let mut mac = self.mac.clone()?;
        for part in parts {
            mac.update(part);
        }
        Some(mac)
    }

    /// The hex signature of the four JSON frames.
    pub(crate) fn sign(&self, parts: &[&[u8]]) -> String {
        self.mac_of(parts)
            .map(|mac| hex::encode(mac.finalize().into_bytes()))
            .unwrap_or_default()
    }

    /// True when `signature` (hex) signs the four JSON frames; without a
    /// key every message is accepted. The comparison takes constant time.
    pub(crate) fn verify(&self, signature: &[u8], parts: &[&[u8]]) -> bool {
        match self.mac_of(parts) {
            None => true,
            Some(mac) => match hex::decode(signature) {
                Ok(raw) => mac.verify_slice(&raw).is_ok(),
                Err(_) => false,
            },
        }
    }
}

/// A message header.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub(crate) struct Header {
    /// Unique per message.
    #[serde(default)]
    pub msg_id: String,
    /// The sender's session.
    #[serde(default)]
    pub session: String,
    /// Who sent it.
    #[serde(default)]
    pub username: String,
    /// ISO 8601 time of sending.
    #[serde(default)]
    pub date: String,
    /// What it is (`execute_request`, `status`, …).
    #[serde(default)]
    pub msg_type: String,
    /// The protocol version.
    #[serde(default)]
    pub version: String,
}

/// The kernel's side of headers: its session id and user name.
#[derive(Clone, Debug)]
pub(crate) struct Origin {
    /// The kernel's session id (a UUID).
    pub session: String,
    /// The user name put in headers.
    pub username: String,
}

impl Origin {
    /// A new kernel origin with a fresh session id.
    pub(crate) fn new() -> Origin {
        Origin {
            session: uuid::Uuid::new_v4().to_string(),
            username: std::env::var("USER").unwrap_or_else(|_| "ordex".to_string()),
        }
    }

    /// A fresh header of type `msg_type`.
    pub(crate) fn header(&self, msg_type: &str) -> Header {
        Header {
            msg_id: uuid::Uuid::new_v4().to_string(),
            session: self.session.clone(),
            username: self.username.clone(),
            date: chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Micros, true),
            msg_type: msg_type.to_string(),
            version: PROTOCOL_VERSION.to_string(),
        }
    }

    /// A reply to `request` (same routing identities, its header as parent).
    pub(crate) fn reply(&self, request: &Message, msg_type: &str, content: Json) -> Message {
        Message {
            identities: request.identities.clone(),
            header: self.header(msg_type),
            parent_header: request.header_json(),
            metadata: json!({}),
            content,
            buffers: Vec::new(),
        }
    }

    /// A message for iopub caused by `parent` (none at start-up), with the
    /// topic `kernel.<session>.<type>`.
    pub(crate) fn publish(
        &self,
        parent: Option<&Message>,
        msg_type: &str,
        content: Json,
    ) -> Message {
        Message {
            identities: vec![Bytes::from(format!("kernel.{}.{}", self.session, msg_type))],
            header: self.header(msg_type),
            parent_header: parent.map_or_else(|| json!({}), Message::header_json),
            metadata: json!({}),
            content,
            buffers: Vec::new(),
        }
    }
}

/// One message of the protocol.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Message {
    /// Routing identities (ROUTER sockets) or the topic (iopub).
    pub identities: Vec<Bytes>,
    /// This message's header.
    pub header: Header,
    /// The header of the message this one answers (`{}` when none).
    pub parent_header: Json,
    /// Free-form metadata.
    pub metadata: Json,
    /// The content, by message type.
    pub content: Json,
    /// Extra binary frames.
    pub buffers: Vec<Bytes>,
}

/// Why frames were not a message.
#[derive(Clone, Debug, PartialEq, Eq)]
pub(crate) enum WireError {
    /// No `<IDS|MSG>` frame, or too few frames after it.
    Framing,
    /// The signature does not match the key.
    Signature,
    /// A frame is not the JSON it should be.
    Json(String),
}

impl std::fmt::Display for WireError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            WireError::Framing => write!(f, "frames without a complete message"),
            WireError::Signature => write!(f, "a message with a wrong signature"),
            WireError::Json(e) => write!(f, "a message with malformed JSON ({e})"),
        }
    }
}

impl Message {
    /// The message type.
    pub(crate) fn msg_type(&self) -> &str {
        &self.header.msg_type
    }

    /// The header as JSON (the parent header of answers).
    pub(crate) fn header_json(&self) -> Json {
        serde_json::to_value(&self.header).unwrap_or_else(|_| json!({}))
    }

    /// The frames of this message, signed.
    pub(crate) fn to_frames(&self, signer: &Signer) -> Vec<Bytes> {
        let jsons: [Vec<u8>; 4] = [
            serde_json::to_vec(&self.header).unwrap_or_else(|_| b"{}".to_vec()),
            serde_json::to_vec(&self.parent_header).unwrap_or_else(|_| b"{}".to_vec()),
            serde_json::to_vec(&self.metadata).unwrap_or_else(|_| b"{}".to_vec()),
            serde_json::to_vec(&self.content).unwrap_or_else(|_| b"{}".to_vec()),
        ];
        let parts: Vec<&[u8]> = jsons.iter().map(Vec::as_slice).collect();
        let signature = signer.sign(&parts);
        let mut frames = self.identities.clone();
        frames.push(Bytes::from_static(DELIMITER));
        frames.push(Bytes::from(signature));
        frames.extend(jsons.into_iter().map(Bytes::from));
        frames.extend(self.buffers.iter().cloned());
        frames
    }

    /// The ZeroMQ message of this message, signed.
    pub(crate) fn to_zmq(&self, signer: &Signer) -> ZmqMessage {
        // The frames always hold the delimiter, so they are never empty.
        ZmqMessage::try_from(self.to_frames(signer))
            .unwrap_or_else(|_| ZmqMessage::from(Bytes::from_static(DELIMITER)))
    }

    /// Reads a message from its frames, checking the signature.
    pub(crate) fn from_frames(frames: Vec<Bytes>, signer: &Signer) -> Result<Message, WireError> {
        let split = frames
            .iter()
            .position(|f| f.as_ref() == DELIMITER)
            .ok_or(WireError::Framing)?;
        let mut rest = frames.into_iter();
        let identities: Vec<Bytes> = rest.by_ref().take(split).collect();
        rest.next(); // the delimiter
        let signature = rest.next().ok_or(WireError::Framing)?;
        let jsons: Vec<Bytes> = rest.by_ref().take(4).collect();
        if jsons.len() != 4 {
            return Err(WireError::Framing);
        }
        let parts: Vec<&[u8]> = jsons.iter().map(Bytes::as_ref).collect();
        if !signer.verify(&signature, &parts) {
            return Err(WireError::Signature);
        }
        let json_of = |b: &Bytes| -> Result<Json, WireError> {
            serde_json::from_slice(b).map_err(|e| WireError::Json(e.to_string()))
        };
        let header: Header = serde_json::from_slice(&jsons[0])
            .map_err(|e| WireError::Json(format!("header: {e}")))?;
        Ok(Message {
            identities,
            header,
            parent_header: json_of(&jsons[1])?,
            metadata: json_of(&jsons[2])?,
            content: json_of(&jsons[3])?,
            buffers: rest.collect(),
        })
    }

    /// Reads a message received on a ZeroMQ socket.
    pub(crate) fn from_zmq(message: ZmqMessage, signer: &Signer) -> Result<Message, WireError> {
        Message::from_frames(message.into_vec(), signer)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn request(origin: &Origin) -> Message {
        Message {
            identities: vec![Bytes::from_static(b"peer-1")],
            header: origin.header("execute_request"),
            parent_header: json!({}),
            metadata: json!({}),
            content: json!({"code": "state q, p", "silent": false}),
            buffers: vec![Bytes::from_static(b"\x00\x01")],
        }
    }

    /// The digest of a message is HMAC-SHA256 over the four JSON frames in
    /// order, as hex (Jupyter messaging protocol 5.x, "The Wire Protocol").
    /// The check value is RFC 4231 test case 2 (key "Jefe"), split over
    /// frames as a client splits a message.
    #[test]
    fn signature_is_hmac_sha256_over_the_four_frames() {
        let signer = Signer::new(b"Jefe");
        let parts: [&[u8]; 4] = [b"what do ya want ", b"for ", b"nothing", b"?"];
        assert_eq!(
            signer.sign(&parts),
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
        );
        assert!(signer.verify(
            b"5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843",
            &parts
        ));
        assert!(!signer.verify(
            b"5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3844",
            &parts
        ));
        assert!(!signer.verify(b"not hex", &parts));
    }

    #[test]
    fn frames_round_trip_with_identities_and_buffers() {
        let origin = Origin::new();
        let signer = Signer::new(b"a-key-of-our-own");
        let msg = request(&origin);
        let frames = msg.to_frames(&signer);
        assert_eq!(frames[0].as_ref(), b"peer-1");
        assert_eq!(frames[1].as_ref(), DELIMITER);
        assert_eq!(frames.len(), 1 + 1 + 1 + 4 + 1);
        let back = Message::from_frames(frames, &signer).expect("round trip");
        assert_eq!(back, msg);
        let zmq = msg.to_zmq(&signer);
        assert_eq!(Message::from_zmq(zmq, &signer).expect("via zmq"), msg);
    }

    #[test]
    fn tampered_or_foreign_messages_are_refused() {
        let origin = Origin::new();
        let signer = Signer::new(b"a-key-of-our-own");
        let mut frames = request(&origin).to_frames(&signer);
        frames[6] = Bytes::from_static(br#"{"code": "quit"}"#);
        assert_eq!(
            Message::from_frames(frames, &signer),
            Err(WireError::Signature)
        );
        let other = Signer::new(b"another key");
        let frames = request(&origin).to_frames(&other);
        assert_eq!(
            Message::from_frames(frames, &signer),
            Err(WireError::Signature)
        );
        let short = vec![Bytes::from_static(DELIMITER), Bytes::new()];
        assert_eq!(
            Message::from_frames(short, &signer),
            Err(WireError::Framing)
        );
        assert_eq!(
            Message::from_frames(vec![Bytes::from_static(b"x")], &signer),
            Err(WireError::Framing)
        );
    }

    #[test]
    fn an_empty_key_signs_nothing_and_accepts_all() {
        let signer = Signer::new(b"");
        let origin = Origin::new();
        let frames = request(&origin).to_frames(&signer);
        assert_eq!(frames[2].as_ref(), b"");
        assert!(Message::from_frames(frames, &signer).is_ok());
    }

    #[test]
    fn replies_route_back_and_name_their_parent() {
        let origin = Origin::new();
        let req = request(&origin);
        let rep = origin.reply(&req, "execute_reply", json!({"status": "ok"}));
        assert_eq!(rep.identities, req.identities);
        assert_eq!(rep.parent_header["msg_id"], json!(req.header.msg_id));
        assert_ne!(rep.header.msg_id, req.header.msg_id);
        assert_eq!(rep.header.version, PROTOCOL_VERSION);
        let out = origin.publish(Some(&req), "status", json!({"execution_state": "idle"}));
        assert!(out.identities[0].starts_with(b"kernel."));
        assert_eq!(out.parent_header["msg_type"], json!("execute_request"));
    }

    #[test]
    fn connection_files_are_read_and_checked() {
        let text = r#"{"shell_port": 5001, "iopub_port": 5002, "stdin_port": 5003,
            "control_port": 5004, "hb_port": 5005, "ip": "127.0.0.1",
            "key": "k", "transport": "tcp", "signature_scheme": "hmac-sha256",
            "kernel_name": "ordex"}"#;
        let c = Connection::parse(text).expect("valid");
        assert_eq!(c.endpoint(c.hb_port), "tcp://127.0.0.1:5005");
        assert!(Connection::parse(&text.replace("\"tcp\"", "\"ipc\"")).is_err());
        assert!(Connection::parse(&text.replace("hmac-sha256", "hmac-md5")).is_err());
        assert!(Connection::parse("{").is_err());
    }
}
