//! `quarry ask --server URL`: send the ranking request to a running `quarry serve`.
//!
//! Takes a server's base URL, the request as the `POST /v1/rank` JSON body, and an optional
//! bearer token; gives the server's JSON answer, or a [`RemoteError`] carrying the server's
//! error code and message. Plain `http://` only (the server speaks no TLS; put a TLS proxy
//! in front and call it with curl if needed). It builds no request itself: the caller
//! (`ask.rs`) fills the body with the same fields it would rank with locally.

use std::path::Path;
use std::time::Duration;

/// How long the client waits for the server in all (connect, send, answer).
pub const CLIENT_TIMEOUT: Duration = Duration::from_secs(30);

/// Why a remote ranking failed.
#[derive(Debug, thiserror::Error)]
pub enum RemoteError {
    #[error("`{0}` is not a server URL like http://127.0.0.1:7341 (only http:// is supported)")]
    BadUrl(String),
    #[error("cannot reach the server at `{url}`: {source}")]
    Unreachable {
        url: String,
        #[source]
        source: ureq::Error,
    },
    /// The server answered with an error; `code` is its machine code (`goal_empty`, ...).
    #[error("the server at `{url}` answered {status} {code}: {message}")]
    Refused {
        url: String,
        status: u16,
        code: String,
        message: String,
    },
    #[error(
        "the server at `{url}` answered {status} with a body that is not quarry's JSON: {why}"
    )]
    BadAnswer {
        url: String,
        status: u16,
        why: String,
    },
    #[error("cannot read the token file `{path}`: {source}")]
    TokenFile {
        path: String,
        #[source]
        source: std::io::Error,
    },
}

/// The rank endpoint of a server given by its base URL (`http://host:port`, with or without
/// a trailing `/`, or the endpoint itself).
pub fn rank_endpoint(url: &str) -> Result<String, RemoteError> {
    let trimmed = url.trim().trim_end_matches('/');
    let rest = trimmed
        .strip_prefix("http://")
        .ok_or_else(|| RemoteError::BadUrl(url.to_string()))?;
    if rest.is_empty() || rest.starts_with('/') {
        return Err(RemoteError::BadUrl(url.to_string()));
    }
    if trimmed.ends_with("/v1/rank") {
        Ok(trimmed.to_string())
    } else {
        Ok(format!("{trimmed}/v1/rank"))
    }
}

/// Reads a bearer token from a file (whole content, whitespace trimmed).
pub fn token_from_file(path: &Path) -> Result<String, RemoteError> {
    std::fs::read_to_string(path)
        .map(|t| t.trim().to_string())
        .map_err(|source| RemoteError::TokenFile {
            path: path.display().to_string(),
            source,
        })
}

/// Sends `request` (a `POST /v1/rank` body) to the server at `url` and returns its answer.
pub fn ask_remote(
    url: &str,
    request: &serde_json::Value,
    token: Option<&str>,
) -> Result<serde_json::Value, RemoteError> {
    let endpoint = rank_endpoint(url)?;
    let agent: ureq::Agent = ureq::Agent::config_builder()
        .http_status_as_error(false)
        .timeout_global(Some(CLIENT_TIMEOUT))
        .build()
        .into();
    let mut call = agent
        .post(&endpoint)
        .header("Content-Type", "application/json");
    if let Some(t) = token {
        call = call.header("Authorization", format!("Bearer {t}"));
    }
    let mut response = call
        .send_json(request)
        .map_err(|source| RemoteError::Unreachable {
            url: endpoint.clone(),
            source,
        })?;
    let status = response.status().as_u16();
    let body: serde_json::Value =
        response
            .body_mut()
            .read_json()
            .map_err(|e| RemoteError::BadAnswer {
                url: endpoint.clone(),
                status,
                why: e.to_string(),
            })?;
    if (200..300).contains(&status) {
        return Ok(body);
    }
    let error = &body["error"];
    match (error["code"].as_str(), error["message"].as_str()) {
        (Some(code), Some(message)) => Err(RemoteError::Refused {
            url: endpoint,
            status,
            code: code.to_string(),
            message: message.to_string(),
        }),
        _ => Err(RemoteError::BadAnswer {
            url: endpoint,
            status,
            why: "no `error.code` and `error.message`".to_string(),
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::{Read, Write};

    #[test]
    fn the_endpoint_is_found_from_a_base_url() {
        assert_eq!(
            rank_endpoint("http://127.0.0.1:7341").unwrap(),
            "http://127.0.0.1:7341/v1/rank"
        );
        assert_eq!(
            rank_endpoint("http://127.0.0.1:7341/").unwrap(),
            "http://127.0.0.1:7341/v1/rank"
        );
        assert_eq!(
            rank_endpoint("http://localhost:7341/v1/rank").unwrap(),
            "http://localhost:7341/v1/rank"
        );
        for bad in ["https://q.example", "127.0.0.1:7341", "http://", "ftp://x"] {
            assert!(
                matches!(rank_endpoint(bad), Err(RemoteError::BadUrl(_))),
                "{bad}"
            );
        }
    }

    /// Answers one HTTP request on a loopback port with `status` and `body`; returns the
    /// port and a handle giving back the request text it received.
    fn one_shot_server(
        status: &'static str,
        body: &'static str,
    ) -> (u16, std::thread::JoinHandle<String>) {
        let listener = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
        let port = listener.local_addr().unwrap().port();
        let handle = std::thread::spawn(move || {
            let (mut stream, _) = listener.accept().unwrap();
            stream
                .set_read_timeout(Some(Duration::from_secs(5)))
                .unwrap();
            let mut seen = Vec::new();
            let mut buf = [0u8; 4096];
            // Read the head, then as many body bytes as Content-Length says.
            loop {
                let n = stream.read(&mut buf).unwrap();
                seen.extend_from_slice(&buf[..n]);
                let text = String::from_utf8_lossy(&seen).to_string();
                if let Some(head_end) = text.find("\r\n\r\n") {
                    let len = text
                        .lines()
                        .find_map(|l| {
                            l.to_ascii_lowercase()
                                .strip_prefix("content-length:")
                                .map(|v| v.trim().parse::<usize>().unwrap())
                        })
                        .unwrap_or(0);
                    if seen.len() >= head_end + 4 + len {
                        break;
                    }
                }
                if n == 0 {
                    break;
                }
            }
            let reply = format!(
                "HTTP/1.1 {status}\r\nContent-Type: application/json\r\nContent-Length: {}\r\nConnection: close\r\n\r\n{body}",
                body.len()
            );
            stream.write_all(reply.as_bytes()).unwrap();
            String::from_utf8_lossy(&seen).to_string()
        });
        (port, handle)
    }

    #[test]
    fn a_success_returns_the_body_and_the_request_carries_json_and_the_token() {
        let (port, seen) = one_shot_server("200 OK", r#"{"premises": []}"#);
        let answer = ask_remote(
            &format!("http://127.0.0.1:{port}"),
            &serde_json::json!({"goal": "size (push q x) = size q + 1"}),
            Some("scheduler-queue-secret-42"),
        )
        .unwrap();
        assert_eq!(answer["premises"], serde_json::json!([]));
        let request = seen.join().unwrap();
        assert!(
            request.starts_with("POST /v1/rank HTTP/1.1\r\n"),
            "{request}"
        );
        let lower = request.to_ascii_lowercase();
        assert!(lower.contains("content-type: application/json"));
        assert!(request.contains("Bearer scheduler-queue-secret-42"));
        assert!(request.contains("size (push q x)"));
    }

    #[test]
    fn a_server_error_keeps_its_code_and_message() {
        let (port, seen) = one_shot_server(
            "422 Unprocessable Content",
            r#"{"error": {"code": "goal_empty", "message": "the goal is empty"}}"#,
        );
        let e = ask_remote(
            &format!("http://127.0.0.1:{port}"),
            &serde_json::json!({"goal": ""}),
            None,
        )
        .unwrap_err();
        match e {
            RemoteError::Refused {
                status,
                code,
                message,
                ..
            } => {
                assert_eq!(status, 422);
                assert_eq!(code, "goal_empty");
                assert_eq!(message, "the goal is empty");
            }
            other => panic!("unexpected {other}"),
        }
        assert!(!seen
            .join()
            .unwrap()
            .to_ascii_lowercase()
            .contains("authorization"));
    }

    #[test]
    fn an_unreachable_server_is_named() {
        // Bind then drop a listener: the port is then (almost surely) closed.
        let port = std::net::TcpListener::bind("127.0.0.1:0")
            .unwrap()
            .local_addr()
            .unwrap()
            .port();
        let e = ask_remote(
            &format!("http://127.0.0.1:{port}"),
            &serde_json::json!({"goal": "x"}),
            None,
        )
        .unwrap_err();
        assert!(matches!(e, RemoteError::Unreachable { .. }), "{e}");
        assert!(e.to_string().contains(&port.to_string()));
    }
}
