//! Bearer-token authentication: the token read from a file, compared in constant time.
//!
//! Takes the path of a token file (never the token itself on the command line, where other
//! users of the machine could read it in the process list) and each request's
//! `Authorization` header; gives accept or a 401 [`ApiError`]. Both the expected and the
//! offered token are hashed with BLAKE3 before the constant-time comparison, so neither the
//! content nor the length of the token leaks through timing. The token never appears in
//! `Debug` output, logs or error messages. It does not decide which routes need a token.

use std::path::{Path, PathBuf};

use axum::http::{header, HeaderMap};
use subtle::ConstantTimeEq;

use super::errors::{ApiError, ErrorCode};

/// The shortest token accepted: 16 bytes (a 128-bit secret in hex would be 32).
pub const MIN_TOKEN_BYTES: usize = 16;

/// Why a token file cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum TokenError {
    #[error("cannot read the token file `{path}`: {source}")]
    Read {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error(
        "the token file `{path}` holds {found} bytes after trimming; a token needs at least {MIN_TOKEN_BYTES}"
    )]
    TooShort { path: PathBuf, found: usize },
    #[error(
        "the token file `{path}` holds a character that cannot go in an HTTP header \
         (use printable ASCII without spaces)"
    )]
    BadCharacter { path: PathBuf },
}

/// The token a request must present, kept only as its BLAKE3 hash.
#[derive(Clone)]
pub struct BearerToken {
    hash: [u8; 32],
}

impl std::fmt::Debug for BearerToken {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("BearerToken(<redacted>)")
    }
}

impl BearerToken {
    /// Reads the token from `path`: its whole content, leading and trailing whitespace removed.
    pub fn from_file(path: &Path) -> Result<BearerToken, TokenError> {
        let text = std::fs::read_to_string(path).map_err(|source| TokenError::Read {
            path: path.to_path_buf(),
            source,
        })?;
        BearerToken::from_secret(text.trim()).map_err(|e| match e {
            SecretProblem::TooShort(found) => TokenError::TooShort {
                path: path.to_path_buf(),
                found,
            },
            SecretProblem::BadCharacter => TokenError::BadCharacter {
                path: path.to_path_buf(),
            },
        })
    }

    fn from_secret(secret: &str) -> Result<BearerToken, SecretProblem> {
        if secret.len() < MIN_TOKEN_BYTES {
            return Err(SecretProblem::TooShort(secret.len()));
        }
        if !secret.bytes().all(|b| b.is_ascii_graphic()) {
            return Err(SecretProblem::BadCharacter);
        }
        Ok(BearerToken {
            hash: *blake3::hash(secret.as_bytes()).as_bytes(),
        })
    }

    /// Whether `offered` is the token, compared in constant time.
    pub fn matches(&self, offered: &str) -> bool {
        let offered = blake3::hash(offered.as_bytes());
        bool::from(offered.as_bytes().ct_eq(&self.hash))
    }

    /// Accepts a request whose `Authorization: Bearer <token>` header carries the token.
    pub fn check(&self, headers: &HeaderMap) -> Result<(), ApiError> {
        let Some(value) = headers.get(header::AUTHORIZATION) else {
            return Err(ApiError::new(
                ErrorCode::Unauthorized,
                "this server needs a bearer token: send `Authorization: Bearer <token>`",
            ));
        };
        let offered = value
            .to_str()
            .ok()
            .and_then(|v| {
                let (scheme, rest) = v.split_once(' ')?;
                scheme.eq_ignore_ascii_case("bearer").then(|| rest.trim())
            })
            .unwrap_or("");
        if self.matches(offered) {
            Ok(())
        } else {
            Err(ApiError::new(
                ErrorCode::Unauthorized,
                "the bearer token is not the one this server was started with",
            ))
        }
    }
}

#[derive(Debug)]
enum SecretProblem {
    TooShort(usize),
    BadCharacter,
}

#[cfg(test)]
mod tests {
    use super::*;

    fn headers(value: &str) -> HeaderMap {
        let mut h = HeaderMap::new();
        h.insert(header::AUTHORIZATION, value.parse().unwrap());
        h
    }

    #[test]
    fn only_the_exact_token_is_accepted() {
        let t = BearerToken::from_secret("scheduler-queue-secret-42").unwrap();
        assert!(t
            .check(&headers("Bearer scheduler-queue-secret-42"))
            .is_ok());
        // RFC 6750 section 2.1 (via RFC 9110 11.1): the scheme name is case-insensitive.
        assert!(t
            .check(&headers("bearer scheduler-queue-secret-42"))
            .is_ok());
        for wrong in [
            "Bearer scheduler-queue-secret-4",
            "Bearer scheduler-queue-secret-420",
            "Basic scheduler-queue-secret-42",
            "scheduler-queue-secret-42",
            "Bearer ",
        ] {
            let e = t.check(&headers(wrong)).unwrap_err();
            assert_eq!(e.code, ErrorCode::Unauthorized, "{wrong}");
        }
        assert_eq!(
            t.check(&HeaderMap::new()).unwrap_err().code,
            ErrorCode::Unauthorized
        );
    }

    #[test]
    fn the_token_never_shows_in_debug_output_or_errors() {
        let t = BearerToken::from_secret("scheduler-queue-secret-42").unwrap();
        assert!(!format!("{t:?}").contains("secret"));
        let e = t.check(&headers("Bearer nope-nope-nope-nope")).unwrap_err();
        assert!(!e.message.contains("scheduler-queue-secret-42"));
        assert!(!e.message.contains("nope"));
    }

    #[test]
    fn a_token_file_is_trimmed_and_short_or_odd_tokens_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("token");
        std::fs::write(&path, "  scheduler-queue-secret-42\n").unwrap();
        let t = BearerToken::from_file(&path).unwrap();
        assert!(t.matches("scheduler-queue-secret-42"));
        std::fs::write(&path, "short\n").unwrap();
        let e = BearerToken::from_file(&path).unwrap_err();
        assert!(matches!(e, TokenError::TooShort { found: 5, .. }));
        assert!(!e.to_string().contains("short\n"));
        std::fs::write(&path, "has a space inside it\n").unwrap();
        assert!(matches!(
            BearerToken::from_file(&path).unwrap_err(),
            TokenError::BadCharacter { .. }
        ));
        let e = BearerToken::from_file(&dir.path().join("missing")).unwrap_err();
        assert!(e.to_string().contains("missing"));
    }
}
