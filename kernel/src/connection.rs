//! The connection file Jupyter writes for a kernel.

use serde::Deserialize;

/// The connection file's fields.
#[derive(Debug, Clone, Deserialize, PartialEq)]
pub struct ConnectionInfo {
    /// Only `tcp` is supported.
    pub transport: String,
    /// The address to bind (`*` means every interface).
    pub ip: String,
    /// Shell ROUTER port.
    pub shell_port: u16,
    /// IOPub PUB port.
    pub iopub_port: u16,
    /// Stdin ROUTER port.
    pub stdin_port: u16,
    /// Control ROUTER port.
    pub control_port: u16,
    /// Heartbeat REP port.
    pub hb_port: u16,
    /// `hmac-sha256`, or empty with an empty key.
    #[serde(default)]
    pub signature_scheme: String,
    /// The HMAC key; empty means messages are not signed.
    #[serde(default)]
    pub key: String,
}

impl ConnectionInfo {
    /// Parses and validates a connection file's text.
    pub fn parse(text: &str) -> Result<ConnectionInfo, String> {
        let c: ConnectionInfo = serde_json::from_str(text)
            .map_err(|e| format!("the connection file is not valid: {e}"))?;
        if c.transport != "tcp" {
            return Err(format!(
                "transport \"{}\" is not supported; partita speaks tcp only",
                c.transport
            ));
        }
        if !c.key.is_empty() && c.signature_scheme != "hmac-sha256" {
            return Err(format!(
                "signature scheme \"{}\" is not supported; partita signs with hmac-sha256",
                c.signature_scheme
            ));
        }
        Ok(c)
    }

    /// Whether the address binds the loopback interface only (127.0.0.0/8, ::1, localhost).
    pub fn is_loopback(&self) -> bool {
        match self.ip.as_str() {
            "localhost" => true,
            ip => ip
                .parse::<std::net::IpAddr>()
                .is_ok_and(|a| a.is_loopback()),
        }
    }

    /// The security of the connection: an error for an unsigned kernel on an address other
    /// machines can reach (anyone there could run statements and read files), a warning for
    /// an unsigned kernel on loopback (any local user could), nothing when messages are
    /// signed.
    pub fn security(&self) -> Result<Option<String>, String> {
        if !self.key.is_empty() {
            return Ok(None);
        }
        if !self.is_loopback() {
            return Err(format!(
                "the connection file has an empty key and the address \"{}\" is reachable from other machines: anyone there could run statements in this kernel; give a key, or bind 127.0.0.1",
                self.ip
            ));
        }
        Ok(Some(
            "warning: the connection file has an empty key, so messages are not signed and any local user who can reach these ports can run statements; Jupyter normally writes a key".into(),
        ))
    }

    /// The endpoint for `port` (`*` becomes `0.0.0.0`, which the zeromq crate parses).
    pub fn endpoint(&self, port: u16) -> String {
        let ip = if self.ip == "*" {
            "0.0.0.0"
        } else {
            self.ip.as_str()
        };
        if ip.contains(':') {
            format!("tcp://[{ip}]:{port}")
        } else {
            format!("tcp://{ip}:{port}")
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const FILE: &str = r#"{"shell_port": 5001, "iopub_port": 5002, "stdin_port": 5003, "control_port": 5004,
        "hb_port": 5005, "ip": "127.0.0.1", "key": "abc", "transport": "tcp",
        "signature_scheme": "hmac-sha256", "kernel_name": "partita"}"#;

    #[test]
    fn parses_a_connection_file() {
        let c = ConnectionInfo::parse(FILE).unwrap();
        assert_eq!(c.endpoint(c.shell_port), "tcp://127.0.0.1:5001");
        assert_eq!(c.key, "abc");
    }

    #[test]
    fn an_empty_key_is_refused_off_loopback_and_warned_on_it() {
        let unsigned = FILE.replace("\"abc\"", "\"\"").replace("hmac-sha256", "");
        let local = ConnectionInfo::parse(&unsigned).unwrap();
        assert!(local.security().unwrap().unwrap().contains("empty key"));
        for ip in ["*", "0.0.0.0", "192.168.1.5", "::"] {
            let c = ConnectionInfo::parse(&unsigned.replace("127.0.0.1", ip)).unwrap();
            let e = c.security().unwrap_err();
            assert!(e.contains(ip), "{e}");
        }
        for ip in ["::1", "localhost", "127.0.0.2"] {
            let c = ConnectionInfo::parse(&unsigned.replace("127.0.0.1", ip)).unwrap();
            assert!(c.security().is_ok(), "{ip}");
        }
        // Signed: nothing to say, on any address.
        let c = ConnectionInfo::parse(&FILE.replace("127.0.0.1", "*")).unwrap();
        assert_eq!(c.security(), Ok(None));
    }

    #[test]
    fn star_binds_every_interface() {
        let c = ConnectionInfo::parse(&FILE.replace("127.0.0.1", "*")).unwrap();
        assert_eq!(c.endpoint(5), "tcp://0.0.0.0:5");
    }

    #[test]
    fn other_schemes_are_refused() {
        let e = ConnectionInfo::parse(&FILE.replace("hmac-sha256", "hmac-md5")).unwrap_err();
        assert!(e.contains("hmac-md5"), "{e}");
        let e = ConnectionInfo::parse(&FILE.replace("\"tcp\"", "\"ipc\"")).unwrap_err();
        assert!(e.contains("ipc"));
        // An empty key with no scheme is an unsigned connection, which the protocol allows.
        let c = ConnectionInfo::parse(&FILE.replace("\"abc\"", "\"\"").replace("hmac-sha256", ""))
            .unwrap();
        assert!(c.key.is_empty());
    }
}
