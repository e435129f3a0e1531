//! Errors as the HTTP API reports them: a status, a stable machine code and a sentence.
//!
//! Takes what went wrong in a request (a malformed body, an unknown declaration, a goal that
//! parses to nothing, an overloaded server); gives the JSON error response
//! `{"error": {"code": "...", "message": "..."}}` with the matching status. The codes are part
//! of the wire contract (listed in `docs/api.md` and `docs/openapi.yaml`); the messages are for
//! a person and may change. It decides no policy: callers choose which error applies.

use axum::http::{header, HeaderValue, StatusCode};
use axum::response::{IntoResponse, Response};
use serde::Serialize;

/// A stable machine-readable error code. The string form is what clients match on.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ErrorCode {
    /// The body is not JSON (syntax error or truncated).
    MalformedJson,
    /// A required field is absent.
    MissingField,
    /// A field the API does not define was sent.
    UnknownField,
    /// A field has the wrong type or a value outside its range.
    InvalidField,
    /// A batch holds more goals than allowed, or none.
    BatchSize,
    /// No or wrong bearer token.
    Unauthorized,
    /// No declaration has that name.
    UnknownDeclaration,
    /// A partial name matches several declarations.
    AmbiguousDeclaration,
    /// No such route.
    UnknownRoute,
    /// The route exists but not with this method.
    MethodNotAllowed,
    /// The body is larger than the server accepts.
    BodyTooLarge,
    /// The body is not `application/json`.
    UnsupportedMediaType,
    /// The body did not arrive in full within the server's body timeout.
    BodyTimeout,
    /// The goal is empty or only whitespace.
    GoalEmpty,
    /// The goal text parses to nothing that can be searched for.
    GoalUnparsable,
    /// The goal is longer than ranking accepts.
    GoalTooLarge,
    /// The pasted goal display says no goals are left.
    NoGoals,
    /// The `file` field names no file of the index.
    UnknownFile,
    /// The `file` field matches several files of the index.
    AmbiguousFile,
    /// The `module` field names no module of the index.
    UnknownModule,
    /// Too many requests are already being served.
    Overloaded,
    /// The request took longer than the server's time limit.
    Timeout,
    /// No index is loaded yet.
    NotReady,
    /// A fault inside the server (a damaged index part, a bug).
    Internal,
}

impl ErrorCode {
    /// Every code, for documentation checks.
    pub const ALL: [ErrorCode; 24] = [
        ErrorCode::MalformedJson,
        ErrorCode::MissingField,
        ErrorCode::UnknownField,
        ErrorCode::InvalidField,
        ErrorCode::BatchSize,
        ErrorCode::Unauthorized,
        ErrorCode::UnknownDeclaration,
        ErrorCode::AmbiguousDeclaration,
        ErrorCode::UnknownRoute,
        ErrorCode::MethodNotAllowed,
        ErrorCode::BodyTooLarge,
        ErrorCode::UnsupportedMediaType,
        ErrorCode::BodyTimeout,
        ErrorCode::GoalEmpty,
        ErrorCode::GoalUnparsable,
        ErrorCode::GoalTooLarge,
        ErrorCode::NoGoals,
        ErrorCode::UnknownFile,
        ErrorCode::AmbiguousFile,
        ErrorCode::UnknownModule,
        ErrorCode::Overloaded,
        ErrorCode::Timeout,
        ErrorCode::NotReady,
        ErrorCode::Internal,
    ];

    /// The code as it appears on the wire.
    pub fn as_str(self) -> &'static str {
        match self {
            ErrorCode::MalformedJson => "malformed_json",
            ErrorCode::MissingField => "missing_field",
            ErrorCode::UnknownField => "unknown_field",
            ErrorCode::InvalidField => "invalid_field",
            ErrorCode::BatchSize => "batch_size",
            ErrorCode::Unauthorized => "unauthorized",
            ErrorCode::UnknownDeclaration => "unknown_declaration",
            ErrorCode::AmbiguousDeclaration => "ambiguous_declaration",
            ErrorCode::UnknownRoute => "unknown_route",
            ErrorCode::MethodNotAllowed => "method_not_allowed",
            ErrorCode::BodyTooLarge => "body_too_large",
            ErrorCode::UnsupportedMediaType => "unsupported_media_type",
            ErrorCode::BodyTimeout => "body_timeout",
            ErrorCode::GoalEmpty => "goal_empty",
            ErrorCode::GoalUnparsable => "goal_unparsable",
            ErrorCode::GoalTooLarge => "goal_too_large",
            ErrorCode::NoGoals => "no_goals",
            ErrorCode::UnknownFile => "unknown_file",
            ErrorCode::AmbiguousFile => "ambiguous_file",
            ErrorCode::UnknownModule => "unknown_module",
            ErrorCode::Overloaded => "overloaded",
            ErrorCode::Timeout => "timeout",
            ErrorCode::NotReady => "not_ready",
            ErrorCode::Internal => "internal",
        }
    }

    /// The HTTP status that goes with the code.
    pub fn status(self) -> StatusCode {
        match self {
            ErrorCode::MalformedJson
            | ErrorCode::MissingField
            | ErrorCode::UnknownField
            | ErrorCode::InvalidField
            | ErrorCode::BatchSize => StatusCode::BAD_REQUEST,
            ErrorCode::Unauthorized => StatusCode::UNAUTHORIZED,
            ErrorCode::UnknownDeclaration | ErrorCode::UnknownRoute => StatusCode::NOT_FOUND,
            ErrorCode::MethodNotAllowed => StatusCode::METHOD_NOT_ALLOWED,
            ErrorCode::AmbiguousDeclaration => StatusCode::CONFLICT,
            ErrorCode::BodyTooLarge => StatusCode::PAYLOAD_TOO_LARGE,
            ErrorCode::UnsupportedMediaType => StatusCode::UNSUPPORTED_MEDIA_TYPE,
            ErrorCode::BodyTimeout => StatusCode::REQUEST_TIMEOUT,
            ErrorCode::GoalEmpty
            | ErrorCode::GoalUnparsable
            | ErrorCode::GoalTooLarge
            | ErrorCode::NoGoals
            | ErrorCode::UnknownFile
            | ErrorCode::AmbiguousFile
            | ErrorCode::UnknownModule => StatusCode::UNPROCESSABLE_ENTITY,
            ErrorCode::Overloaded | ErrorCode::NotReady => StatusCode::SERVICE_UNAVAILABLE,
            ErrorCode::Timeout => StatusCode::GATEWAY_TIMEOUT,
            ErrorCode::Internal => StatusCode::INTERNAL_SERVER_ERROR,
        }
    }
}

/// One API error: what the client gets back as JSON.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
#[error("{}: {message}", code.as_str())]
pub struct ApiError {
    /// The machine code (and so the status).
    pub code: ErrorCode,
    /// A sentence for a person, naming the input that was wrong.
    pub message: String,
    /// For `ambiguous_declaration` and `ambiguous_file`: some of the names that matched.
    pub candidates: Vec<String>,
}

impl ApiError {
    /// An error with `code` and `message`.
    pub fn new(code: ErrorCode, message: impl Into<String>) -> ApiError {
        ApiError {
            code,
            message: message.into(),
            candidates: Vec::new(),
        }
    }

    /// The same error listing `candidates`.
    pub fn with_candidates(mut self, candidates: Vec<String>) -> ApiError {
        self.candidates = candidates;
        self
    }

    /// The body `{"error": {...}}` as a JSON value (batch items embed it).
    pub fn body(&self) -> ErrorBody {
        ErrorBody {
            error: ErrorDetail {
                code: self.code.as_str(),
                message: self.message.clone(),
                candidates: self.candidates.clone(),
            },
        }
    }
}

/// The JSON form of an error: `{"error": {"code": ..., "message": ...}}`.
#[derive(Clone, Debug, Serialize)]
pub struct ErrorBody {
    /// The error itself.
    pub error: ErrorDetail,
}

/// The inside of [`ErrorBody`].
#[derive(Clone, Debug, Serialize)]
pub struct ErrorDetail {
    /// The stable machine code.
    pub code: &'static str,
    /// A sentence for a person.
    pub message: String,
    /// Names that matched an ambiguous request.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub candidates: Vec<String>,
}

impl IntoResponse for ApiError {
    fn into_response(self) -> Response {
        let status = self.code.status();
        let body = match serde_json::to_vec(&self.body()) {
            Ok(bytes) => bytes,
            // Serialising plain strings cannot fail; keep a fixed body rather than panic.
            Err(_) => {
                br#"{"error":{"code":"internal","message":"error encoding failed"}}"#.to_vec()
            }
        };
        let mut response = (status, body).into_response();
        let headers = response.headers_mut();
        headers.insert(
            header::CONTENT_TYPE,
            HeaderValue::from_static("application/json"),
        );
        match self.code {
            ErrorCode::Unauthorized => {
                headers.insert(
                    header::WWW_AUTHENTICATE,
                    HeaderValue::from_static("Bearer realm=\"quarry\""),
                );
            }
            ErrorCode::Overloaded | ErrorCode::NotReady => {
                headers.insert(header::RETRY_AFTER, HeaderValue::from_static("1"));
            }
            _ => {}
        }
        response
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn codes_are_distinct_snake_case_and_map_to_error_statuses() {
        let mut seen = std::collections::BTreeSet::new();
        for code in ErrorCode::ALL {
            let s = code.as_str();
            assert!(seen.insert(s), "code `{s}` repeated");
            assert!(s.chars().all(|c| c.is_ascii_lowercase() || c == '_'), "{s}");
            // Every error status is a 4xx or 5xx (RFC 9110 section 15: common practice).
            let status = code.status().as_u16();
            assert!((400..600).contains(&status), "{s} has status {status}");
        }
    }

    #[test]
    fn the_response_is_json_with_code_and_message() {
        let response = ApiError::new(ErrorCode::GoalEmpty, "the goal is empty").into_response();
        assert_eq!(response.status(), StatusCode::UNPROCESSABLE_ENTITY);
        assert_eq!(
            response.headers().get(header::CONTENT_TYPE).unwrap(),
            "application/json"
        );
        let body =
            serde_json::to_value(ApiError::new(ErrorCode::GoalEmpty, "the goal is empty").body())
                .unwrap();
        assert_eq!(body["error"]["code"], "goal_empty");
        assert_eq!(body["error"]["message"], "the goal is empty");
        assert!(body["error"].get("candidates").is_none());
    }

    #[test]
    fn unauthorized_asks_for_a_bearer_token_and_overload_says_when_to_retry() {
        let r = ApiError::new(ErrorCode::Unauthorized, "no token").into_response();
        assert!(r.headers().get(header::WWW_AUTHENTICATE).is_some());
        let r = ApiError::new(ErrorCode::Overloaded, "busy").into_response();
        assert_eq!(r.headers().get(header::RETRY_AFTER).unwrap(), "1");
    }
}
