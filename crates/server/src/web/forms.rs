//! Reading web forms: the one decoder for `application/x-www-form-urlencoded` bodies.
//!
//! Every page route that takes a form reads it here, so that all of them check the content type
//! the same way, cap the body the same way and refuse a malformed form with a plain bad
//! request. Each route only says how large its form may be and what to tell the user.

use axum::extract::Request;
use axum::http::{HeaderMap, header};

use crate::error::{Result, ServerError};

/// The largest form read by the routes that have no smaller cap of their own, in bytes.
///
/// It is the two mebibytes that the framework's own form reader allowed.
pub(crate) const FORM_LIMIT: usize = 2 * 1024 * 1024;

/// The content type of a web form.
const FORM_TYPE: &str = "application/x-www-form-urlencoded";

/// How one route reads its form and words its refusals.
#[derive(Debug, Clone, Copy)]
pub(crate) struct FormReading {
    /// The largest body read, in bytes; a longer one is refused as too large.
    pub limit: usize,
    /// What to say when the body is not a web form at all.
    pub not_a_form: &'static str,
    /// What to say when the body is a web form that cannot be decoded.
    pub unreadable: &'static str,
}

impl FormReading {
    /// A reading with [`FORM_LIMIT`] that says the same thing for any unreadable body.
    pub(crate) const fn plain(message: &'static str) -> Self {
        FormReading { limit: FORM_LIMIT, not_a_form: message, unreadable: message }
    }
}

/// Says whether the request's content type, without its parameters, is `wanted`.
pub(crate) fn content_type_is(headers: &HeaderMap, wanted: &str) -> bool {
    headers
        .get(header::CONTENT_TYPE)
        .and_then(|v| v.to_str().ok())
        .and_then(|v| v.split(';').next())
        .is_some_and(|v| v.trim().eq_ignore_ascii_case(wanted))
}

/// Reads a form post into its fields, in order, with repeated names kept.
///
/// A body that is not a web form, or one with a malformed escape or text that is not UTF-8, is
/// a bad request with the route's own message; a body over the limit is refused as too large.
pub(crate) async fn read(request: Request, how: FormReading) -> Result<Vec<(String, String)>> {
    if !content_type_is(request.headers(), FORM_TYPE) {
        return Err(ServerError::BadRequest(how.not_a_form.into()));
    }
    let body = super::read_body(request.into_body(), how.limit).await?;
    decode(&body).ok_or_else(|| ServerError::BadRequest(how.unreadable.into()))
}

/// The value of the first field called `name`, if there is one.
pub(crate) fn first<'a>(fields: &'a [(String, String)], name: &str) -> Option<&'a str> {
    fields.iter().find(|(k, _)| k == name).map(|(_, v)| v.as_str())
}

/// The value of the last field called `name`, if there is one (a later field overrides an
/// earlier one, as when a hidden default precedes a visible input).
pub(crate) fn last<'a>(fields: &'a [(String, String)], name: &str) -> Option<&'a str> {
    fields.iter().rev().find(|(k, _)| k == name).map(|(_, v)| v.as_str())
}

/// Decodes a whole form body; `None` when an escape is malformed or the text is not UTF-8.
fn decode(body: &[u8]) -> Option<Vec<(String, String)>> {
    let text = std::str::from_utf8(body).ok()?;
    let mut fields = Vec::new();
    for part in text.split('&').filter(|p| !p.is_empty()) {
        let (name, value) = part.split_once('=').unwrap_or((part, ""));
        fields.push((percent_decode(name)?, percent_decode(value)?));
    }
    Some(fields)
}

/// Decodes `+` as a space and `%XX` escapes (two hex digits, no sign); `None` for a malformed
/// escape or invalid UTF-8.
fn percent_decode(text: &str) -> Option<String> {
    let bytes = text.as_bytes();
    let mut out = Vec::with_capacity(bytes.len());
    let mut i = 0;
    while i < bytes.len() {
        match bytes[i] {
            b'+' => out.push(b' '),
            b'%' => {
                let hex = text.get(i + 1..i + 3).filter(|h| h.bytes().all(|b| b.is_ascii_hexdigit()))?;
                out.push(u8::from_str_radix(hex, 16).ok()?);
                i += 2;
            }
            b => out.push(b),
        }
        i += 1;
    }
    String::from_utf8(out).ok()
}

#[cfg(test)]
mod tests {
    use super::decode;

    fn pairs(list: &[(&str, &str)]) -> Vec<(String, String)> {
        list.iter().map(|(k, v)| ((*k).to_owned(), (*v).to_owned())).collect()
    }

    #[test]
    fn fields_keep_their_order_and_repeats() {
        assert_eq!(
            decode(b"a=1&b=x+y&a=%C3%A9&c"),
            Some(pairs(&[("a", "1"), ("b", "x y"), ("a", "é"), ("c", "")]))
        );
        assert_eq!(decode(b""), Some(Vec::new()));
    }

    #[test]
    fn malformed_escapes_and_bad_text_are_refused() {
        assert_eq!(decode(b"a=%zz"), None);
        assert_eq!(decode(b"a=%4"), None);
        assert_eq!(decode(b"a=%FF"), None);
        assert_eq!(decode(b"a=%+1"), None);
    }
}
