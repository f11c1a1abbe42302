//! The document reader: one input line to the text of its document, shared
//! by `ingest --jsonl`, `score`, the service and the Python module.
//!
//! Under [`Format::JsonLines`] a line is one JSON object; the value of its
//! text field (a string) is the document's text and the value of its id
//! field, if any, its id. Under [`Format::Lines`] the line itself is the
//! text. Either way the text's sentences are its lines ([`sentences`]): it
//! is cut at `\n` and one trailing `\r` is dropped from each piece.
//!
//! A line that is not JSON, not a JSON object, lacks the text field or
//! whose text field is not a string is a *bad line* ([`BadLine`]); the
//! callers name it by file and line, count it and go on.

use std::fmt;

use serde::de::{DeserializeSeed, Deserializer, IgnoredAny, MapAccess, Visitor};
use serde::{Deserialize, Serialize};
use serde_json::Value;

/// How input lines hold documents.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Format {
    /// One JSON object a line.
    JsonLines {
        /// The field that holds the text (a string).
        text_field: String,
        /// The field whose value is the document's id (`null` if absent).
        id_field: String,
    },
    /// One document a line; the line is its text.
    #[default]
    Lines,
}

impl Format {
    /// JSON lines with the text in `text_field` and the id in `id`.
    pub fn json_lines(text_field: &str) -> Format {
        Format::JsonLines {
            text_field: text_field.into(),
            id_field: "id".into(),
        }
    }

    /// True for [`Format::Lines`].
    pub fn is_lines(&self) -> bool {
        matches!(self, Format::Lines)
    }

    /// A short description for messages: `plain lines` or `JSON lines
    /// (text field "text")`.
    pub fn describe(&self) -> String {
        match self {
            Format::Lines => "plain lines".into(),
            Format::JsonLines { text_field, .. } => {
                format!("JSON lines (text field {text_field:?})")
            }
        }
    }
}

/// Why a line holds no document.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum BadLine {
    /// The line is not JSON (serde_json's message).
    NotJson(String),
    /// The line is JSON but not an object.
    NotObject,
    /// The object has no such field.
    NoField(String),
    /// The field's value is not a string.
    NotString(String),
}

impl fmt::Display for BadLine {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            BadLine::NotJson(e) => write!(f, "not JSON: {e}"),
            BadLine::NotObject => write!(f, "not a JSON object"),
            BadLine::NoField(name) => write!(f, "no field {name:?}"),
            BadLine::NotString(name) => write!(f, "the field {name:?} is not a string"),
        }
    }
}

/// One document: its text and its id.
#[derive(Clone, Debug, PartialEq)]
pub struct Document<'a> {
    /// The id field's value (`null` if absent; `None` under
    /// [`Format::Lines`], where the caller numbers the lines).
    pub id: Option<Value>,
    /// The text.
    pub text: std::borrow::Cow<'a, [u8]>,
}

/// The document held by `line` (without its line end).
pub fn read_document<'a>(format: &Format, line: &'a [u8]) -> Result<Document<'a>, BadLine> {
    match format {
        Format::Lines => Ok(Document {
            id: None,
            text: line.into(),
        }),
        Format::JsonLines {
            text_field,
            id_field,
        } => {
            let seed = Fields {
                text: text_field,
                id: id_field,
            };
            let mut de = serde_json::Deserializer::from_slice(line);
            let got = seed
                .deserialize(&mut de)
                .and_then(|g| de.end().map(|()| g))
                .map_err(|e| match e.classify() {
                    serde_json::error::Category::Data => BadLine::NotObject,
                    _ => BadLine::NotJson(e.to_string()),
                })?;
            match got.text {
                Some(Value::String(s)) => Ok(Document {
                    id: Some(got.id.unwrap_or(Value::Null)),
                    text: s.into_bytes().into(),
                }),
                Some(_) => Err(BadLine::NotString(text_field.clone())),
                None => Err(BadLine::NoField(text_field.clone())),
            }
        }
    }
}

/// The sentences of a document's text: its pieces between `\n`, each
/// without one trailing `\r` (empty pieces included; a sentence without
/// tokens counts as none).
pub fn sentences(text: &[u8]) -> impl Iterator<Item = &[u8]> {
    text.split(|&b| b == b'\n')
        .map(|s| s.strip_suffix(b"\r").unwrap_or(s))
}

/// Reads an object, keeping only the text and id fields (the last value
/// of a repeated key wins, as with a map); every other value is skipped
/// without being built.
struct Fields<'f> {
    text: &'f str,
    id: &'f str,
}

struct Got {
    text: Option<Value>,
    id: Option<Value>,
}

impl<'de> DeserializeSeed<'de> for Fields<'_> {
    type Value = Got;
    fn deserialize<D: Deserializer<'de>>(self, d: D) -> Result<Got, D::Error> {
        d.deserialize_map(self)
    }
}

impl<'de> Visitor<'de> for Fields<'_> {
    type Value = Got;

    fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("a JSON object")
    }

    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Got, A::Error> {
        let mut got = Got {
            text: None,
            id: None,
        };
        while let Some(key) = map.next_key::<std::borrow::Cow<'de, str>>()? {
            if key == self.text {
                got.text = Some(map.next_value()?);
            } else if key == self.id {
                got.id = Some(map.next_value()?);
            } else {
                map.next_value::<IgnoredAny>()?;
            }
        }
        Ok(got)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn doc(line: &str) -> Result<(Option<Value>, String), BadLine> {
        read_document(&Format::json_lines("text"), line.as_bytes())
            .map(|d| (d.id, String::from_utf8(d.text.into_owned()).unwrap()))
    }

    #[test]
    fn text_and_id_are_read_and_other_fields_skipped() {
        let got = doc(r#"{"url":"x","meta":{"a":[1,2]},"text":"a b\nc","id":7}"#).unwrap();
        assert_eq!(got, (Some(Value::from(7)), "a b\nc".into()));
        // No id: null.
        assert_eq!(
            doc(r#"{"text":""}"#).unwrap(),
            (Some(Value::Null), "".into())
        );
        // JSON escapes are decoded (RFC 8259, section 7).
        assert_eq!(doc(r#"{"text":"\u00e9\t"}"#).unwrap().1, "é\t");
    }

    #[test]
    fn bad_lines_say_why() {
        assert!(matches!(doc("{\"text\": "), Err(BadLine::NotJson(_))));
        assert!(matches!(doc(""), Err(BadLine::NotJson(_))));
        assert!(matches!(doc(r#"{"text":"a"} x"#), Err(BadLine::NotJson(_))));
        assert_eq!(doc("[1]"), Err(BadLine::NotObject));
        assert_eq!(doc("\"text\""), Err(BadLine::NotObject));
        assert_eq!(doc(r#"{"body":"a"}"#), Err(BadLine::NoField("text".into())));
        assert_eq!(
            doc(r#"{"text":["a"]}"#),
            Err(BadLine::NotString("text".into()))
        );
        assert_eq!(
            BadLine::NoField("text".into()).to_string(),
            "no field \"text\""
        );
    }

    #[test]
    fn lines_are_their_own_text() {
        let d = read_document(&Format::Lines, b"{not json").unwrap();
        assert_eq!(d.id, None);
        assert_eq!(&*d.text, b"{not json");
    }

    #[test]
    fn sentences_are_the_lines_of_the_text() {
        let s: Vec<&[u8]> = sentences(b"a\r\nb\rc\n\nd").collect();
        assert_eq!(s, vec![&b"a"[..], b"b\rc", b"", b"d"]);
    }
}
