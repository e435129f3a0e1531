//! Reading a JSON request body: content type, size limit, and errors that name the field.
//!
//! Takes a request's headers and body stream, a byte limit and a time limit; gives the decoded
//! value or an [`ApiError`]: 415 when the body is not `application/json`, 413 when it is over
//! the limit (checked on the declared length first, then while reading), 408 when it has not
//! arrived in full within the time limit (a client sending a byte a second), 400 with the
//! field's path
//! for JSON that is malformed, lacks a field, has an unknown field or a wrong type. It knows
//! nothing of what the fields mean (see `wire.rs` for that).

use std::time::Duration;

use axum::body::Body;
use axum::http::{header, HeaderMap};
use serde::de::DeserializeOwned;

use super::errors::{ApiError, ErrorCode};

/// Whether the `Content-Type` header says JSON (`application/json`, any parameters).
pub fn is_json_content_type(headers: &HeaderMap) -> bool {
    let Some(value) = headers.get(header::CONTENT_TYPE) else {
        return false;
    };
    let Ok(text) = value.to_str() else {
        return false;
    };
    let essence = text.split(';').next().unwrap_or("").trim();
    essence.eq_ignore_ascii_case("application/json")
}

/// Reads and decodes a JSON body of at most `limit` bytes, which must arrive in full within
/// `timeout`.
pub async fn json_body<T: DeserializeOwned>(
    headers: &HeaderMap,
    body: Body,
    limit: usize,
    timeout: Duration,
) -> Result<T, ApiError> {
    if !is_json_content_type(headers) {
        let sent = headers
            .get(header::CONTENT_TYPE)
            .and_then(|v| v.to_str().ok())
            .unwrap_or("none");
        return Err(ApiError::new(
            ErrorCode::UnsupportedMediaType,
            format!(
                "the body must be JSON sent with `Content-Type: application/json` (got `{sent}`)"
            ),
        ));
    }
    let declared = headers
        .get(header::CONTENT_LENGTH)
        .and_then(|v| v.to_str().ok())
        .and_then(|v| v.parse::<u64>().ok());
    if declared.is_some_and(|n| n > limit as u64) {
        return Err(too_large(limit));
    }
    let read = match tokio::time::timeout(timeout, axum::body::to_bytes(body, limit)).await {
        Ok(read) => read,
        Err(_) => {
            return Err(ApiError::new(
                ErrorCode::BodyTimeout,
                format!(
                    "the request body did not arrive in full within the server's limit of {} ms",
                    timeout.as_millis()
                ),
            ))
        }
    };
    let bytes = match read {
        Ok(b) => b,
        Err(e) => {
            let over = std::error::Error::source(&e)
                .is_some_and(|s| s.is::<http_body_util::LengthLimitError>())
                || e.into_inner().is::<http_body_util::LengthLimitError>();
            return Err(if over {
                too_large(limit)
            } else {
                ApiError::new(
                    ErrorCode::MalformedJson,
                    "the request body could not be read to its end",
                )
            });
        }
    };
    decode_json(&bytes)
}

fn too_large(limit: usize) -> ApiError {
    ApiError::new(
        ErrorCode::BodyTooLarge,
        format!("the request body is over the server's limit of {limit} bytes"),
    )
}

/// Decodes `bytes` as one JSON value of type `T`, with nothing after it.
pub fn decode_json<T: DeserializeOwned>(bytes: &[u8]) -> Result<T, ApiError> {
    let mut de = serde_json::Deserializer::from_slice(bytes);
    let value: T = serde_path_to_error::deserialize(&mut de).map_err(|e| {
        let path = e.path().to_string();
        describe(e.into_inner(), &path)
    })?;
    de.end().map_err(|e| describe(e, "."))?;
    Ok(value)
}

/// Turns a serde_json error at `path` into an API error with the matching code.
fn describe(e: serde_json::Error, path: &str) -> ApiError {
    use serde_json::error::Category;
    let text = e.to_string();
    let code = match e.classify() {
        Category::Syntax | Category::Eof | Category::Io => ErrorCode::MalformedJson,
        Category::Data if text.starts_with("missing field") => ErrorCode::MissingField,
        Category::Data if text.starts_with("unknown field") => ErrorCode::UnknownField,
        Category::Data => ErrorCode::InvalidField,
    };
    let message = match code {
        ErrorCode::MalformedJson => format!("the body is not valid JSON: {text}"),
        ErrorCode::UnknownField if path == "." => text,
        ErrorCode::UnknownField | ErrorCode::MissingField => format!("in `{path}`: {text}"),
        _ if path == "." => format!("the body has the wrong shape: {text}"),
        _ => format!("field `{path}`: {text}"),
    };
    ApiError::new(code, message)
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde::Deserialize;

    #[derive(Debug, Deserialize)]
    #[serde(deny_unknown_fields)]
    #[allow(dead_code)]
    struct Probe {
        goal: String,
        #[serde(default)]
        limit: u32,
    }

    #[test]
    fn each_kind_of_bad_body_gets_its_own_code_and_names_the_field() {
        let e = decode_json::<Probe>(b"{\"goal\": ").unwrap_err();
        assert_eq!(e.code, ErrorCode::MalformedJson);
        let e = decode_json::<Probe>(b"{}").unwrap_err();
        assert_eq!(e.code, ErrorCode::MissingField);
        assert!(e.message.contains("`goal`"), "{}", e.message);
        let e = decode_json::<Probe>(br#"{"goal": "x", "limt": 3}"#).unwrap_err();
        assert_eq!(e.code, ErrorCode::UnknownField);
        assert!(e.message.contains("`limt`"), "{}", e.message);
        let e = decode_json::<Probe>(br#"{"goal": "x", "limit": "many"}"#).unwrap_err();
        assert_eq!(e.code, ErrorCode::InvalidField);
        assert!(e.message.contains("`limit`"), "{}", e.message);
        let e = decode_json::<Probe>(br#"{"goal": "x"} {"goal": "y"}"#).unwrap_err();
        assert_eq!(e.code, ErrorCode::MalformedJson);
        assert!(decode_json::<Probe>(br#"{"goal": "x"}"#).is_ok());
    }

    #[test]
    fn only_application_json_is_accepted() {
        let mut h = HeaderMap::new();
        assert!(!is_json_content_type(&h));
        h.insert(
            header::CONTENT_TYPE,
            "application/json; charset=utf-8".parse().unwrap(),
        );
        assert!(is_json_content_type(&h));
        h.insert(header::CONTENT_TYPE, "Application/JSON".parse().unwrap());
        assert!(is_json_content_type(&h));
        h.insert(
            header::CONTENT_TYPE,
            "application/x-www-form-urlencoded".parse().unwrap(),
        );
        assert!(!is_json_content_type(&h));
        h.insert(header::CONTENT_TYPE, "text/plain".parse().unwrap());
        assert!(!is_json_content_type(&h));
    }
}
