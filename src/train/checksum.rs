//! The model file's checksum and the one streaming pass that checks it.
//!
//! The canonical form of a model file is its content as compact JSON:
//! members in the order they appear, no whitespace, numbers in shortest
//! round-trip form as serde_json writes them (`1.50` is `1.5`, `3.0e300` is
//! `3e+300`), strings escaped as serde_json escapes
//! them, and the top-level `checksum` member left out. The writer hashes
//! the compact serialisation of the typed file; the reader rebuilds the same
//! bytes from the file's tokens as it streams through them, keeping
//! nothing but the few top-level fields it needs, so an edited or padded
//! file is refused before anything is built from it.
//!
//! The same pass counts the values in the file, for an upper bound on what
//! building the typed model from it would take ([`Scan::memory_bound`]).

use std::fmt;
use std::io::Write;

use serde::de::{DeserializeSeed, MapAccess, SeqAccess, Visitor};
use sha2::Digest;

/// Feeds what is written to a SHA-256.
pub struct Hashing(pub sha2::Sha256);

impl Hashing {
    /// A fresh hash.
    pub fn new() -> Hashing {
        Hashing(sha2::Sha256::new())
    }

    /// `sha256:` and the hex digest.
    pub fn finish(self) -> String {
        format!("sha256:{}", crate::io::hex(&self.0.finalize()))
    }
}

impl Default for Hashing {
    fn default() -> Self {
        Hashing::new()
    }
}

impl Write for Hashing {
    fn write(&mut self, bytes: &[u8]) -> std::io::Result<usize> {
        self.0.update(bytes);
        Ok(bytes.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

/// What one pass over a model file's bytes found.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Scan {
    /// The top-level `format`, when a string.
    pub format: Option<String>,
    /// The top-level `format_version`, when a whole number.
    pub format_version: Option<u64>,
    /// The top-level `checksum`, when a string.
    pub checksum: Option<String>,
    /// The checksum of the canonical form.
    pub digest: String,
    /// Numbers, booleans and nulls.
    pub scalars: u64,
    /// Strings (keys included), and their bytes.
    pub strings: u64,
    /// Bytes of strings.
    pub string_bytes: u64,
    /// Arrays and objects.
    pub containers: u64,
}

impl Scan {
    /// An upper bound on the bytes the typed model takes when built from
    /// the file: every value at its costliest in memory (a number as an
    /// `f64` in a vector that may have doubled, a string as a `String` in
    /// one, a container as a vector header with its spare capacity).
    pub fn memory_bound(&self) -> u64 {
        16 * self.scalars + 64 * self.strings + self.string_bytes + 64 * self.containers
    }
}

/// Streams through `bytes`: the canonical form's checksum, the top-level
/// fields a loader checks first, and the value counts.
pub fn scan(bytes: &[u8]) -> Result<Scan, serde_json::Error> {
    let mut sink = Sink { hash: Hashing::new(), scan: Scan::default(), kept: None };
    let mut deserializer = serde_json::Deserializer::from_slice(bytes);
    DeserializeSeed::deserialize(
        Canonical { sink: &mut sink, comma: false, keep: false, top: true },
        &mut deserializer,
    )?;
    deserializer.end()?;
    let Sink { hash, mut scan, .. } = sink;
    scan.digest = hash.finish();
    Ok(scan)
}

struct Sink {
    hash: Hashing,
    scan: Scan,
    /// The last string or whole number read by a [`Canonical`] told to keep it.
    kept: Option<serde_json::Value>,
}

impl Sink {
    fn put(&mut self, bytes: &[u8]) {
        self.hash.0.update(bytes);
    }

    fn string(&mut self, text: &str) {
        self.scan.strings += 1;
        self.scan.string_bytes += text.len() as u64;
        // serde_json's own escaping, so the bytes match the writer's.
        let _ = serde_json::to_writer(&mut self.hash, text);
    }
}

/// One value, written to the hash in canonical form (after a comma when
/// it is not the first of its array). The file's top-level object (`top`)
/// must be an object; its `checksum` is kept and left out of the hash, and
/// its `format` and `format_version` are kept (`keep`) as they go by.
struct Canonical<'s> {
    sink: &'s mut Sink,
    comma: bool,
    keep: bool,
    top: bool,
}

impl Canonical<'_> {
    fn start(&mut self) {
        if self.comma {
            self.sink.put(b",");
        }
    }

    fn scalar(mut self, text: &[u8]) {
        self.start();
        self.sink.scan.scalars += 1;
        self.sink.put(text);
    }
}

impl<'de> DeserializeSeed<'de> for Canonical<'_> {
    type Value = ();

    fn deserialize<D: serde::Deserializer<'de>>(self, deserializer: D) -> Result<(), D::Error> {
        if self.top {
            deserializer.deserialize_map(self)
        } else {
            deserializer.deserialize_any(self)
        }
    }
}

impl<'de> Visitor<'de> for Canonical<'_> {
    type Value = ();

    fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(if self.top { "a JSON object" } else { "a JSON value" })
    }

    fn visit_bool<E>(self, v: bool) -> Result<(), E> {
        self.scalar(if v { b"true" } else { b"false" });
        Ok(())
    }

    fn visit_i64<E>(self, v: i64) -> Result<(), E> {
        self.scalar(v.to_string().as_bytes());
        Ok(())
    }

    fn visit_u64<E>(self, v: u64) -> Result<(), E> {
        if self.keep {
            self.sink.kept = Some(v.into());
        }
        self.scalar(v.to_string().as_bytes());
        Ok(())
    }

    fn visit_f64<E: serde::de::Error>(self, v: f64) -> Result<(), E> {
        // Written exactly as the writer's serde_json writes it (its float
        // formatter puts a `+` in large exponents, `1e+154`, where other
        // shortest-digit writers do not); JSON has no non-finite numbers.
        use serde_json::ser::Formatter;
        let mut buffer = std::io::Cursor::new([0u8; 40]);
        if serde_json::ser::CompactFormatter.write_f64(&mut buffer, v).is_err() {
            return Err(E::custom("a number too long to write"));
        }
        let written = buffer.position() as usize;
        self.scalar(&buffer.get_ref()[..written]);
        Ok(())
    }

    fn visit_str<E>(mut self, v: &str) -> Result<(), E> {
        if self.keep {
            self.sink.kept = Some(v.into());
        }
        self.start();
        self.sink.string(v);
        Ok(())
    }

    fn visit_unit<E>(self) -> Result<(), E> {
        self.scalar(b"null");
        Ok(())
    }

    fn visit_seq<A: SeqAccess<'de>>(mut self, mut seq: A) -> Result<(), A::Error> {
        self.start();
        self.sink.scan.containers += 1;
        self.sink.put(b"[");
        let mut comma = false;
        while seq.next_element_seed(Canonical { sink: &mut *self.sink, comma, keep: false, top: false })?.is_some() {
            comma = true;
        }
        self.sink.put(b"]");
        Ok(())
    }

    fn visit_map<A: MapAccess<'de>>(mut self, mut map: A) -> Result<(), A::Error> {
        self.start();
        let sink = self.sink;
        sink.scan.containers += 1;
        sink.put(b"{");
        let mut first = true;
        while let Some(key) = map.next_key::<std::borrow::Cow<'de, str>>()? {
            if self.top && key == "checksum" {
                // A string, or an error: never a large value kept whole.
                sink.scan.checksum = Some(map.next_value::<String>()?);
                continue;
            }
            if !first {
                sink.put(b",");
            }
            first = false;
            sink.string(&key);
            sink.put(b":");
            let keep = self.top && matches!(key.as_ref(), "format" | "format_version");
            sink.kept = None;
            map.next_value_seed(Canonical { sink: &mut *sink, comma: false, keep, top: false })?;
            match (keep, key.as_ref(), sink.kept.take()) {
                (true, "format", Some(serde_json::Value::String(name))) => sink.scan.format = Some(name),
                (true, "format_version", Some(version)) => sink.scan.format_version = version.as_u64(),
                _ => {}
            }
        }
        sink.put(b"}");
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layout_is_not_content_but_values_are() {
        let written =
            r#"{"format":"f","format_version":2,"a":[1.5,-2,3e300,"x\"y",null,true,{"b":0.1}],"checksum":"sha256:00"}"#;
        let spaced = "{ \"format\" : \"f\",\n \"format_version\": 2, \"checksum\": \"sha256:11\",\n \"a\": [1.50, -2, 3.0e300, \"x\\\"y\", null, true, {\"b\": 1e-1}] }";
        let a = scan(written.as_bytes()).unwrap();
        let b = scan(spaced.as_bytes()).unwrap();
        assert_eq!(a.digest, b.digest);
        assert_eq!(
            (a.format.as_deref(), a.format_version, a.checksum.as_deref()),
            (Some("f"), Some(2), Some("sha256:00"))
        );
        let edited = scan(written.replace("1.5", "1.6").as_bytes()).unwrap();
        assert_ne!(a.digest, edited.digest);
        // The hash of the canonical bytes, with the checksum member left out.
        let canonical = r#"{"format":"f","format_version":2,"a":[1.5,-2,3e+300,"x\"y",null,true,{"b":0.1}]}"#;
        let mut expected = Hashing::new();
        expected.write_all(canonical.as_bytes()).unwrap();
        assert_eq!(a.digest, expected.finish());
        assert_eq!((a.scalars, a.containers), (7, 3));
    }

    /// The canonical bytes of compact serde_json output are that output
    /// itself, whatever the numbers: serde_json writes `1e+154` with a
    /// sign in the exponent, and the reader must write it so too.
    #[test]
    fn compact_serde_json_is_its_own_canonical_form() {
        let numbers = [1e154, 1e16, 1.5e300, -2.5e-310, 5e-324, 0.1, 1e-7, 123456789012345680000.0, -0.0];
        let text = serde_json::to_string(&serde_json::json!({ "format": "f", "a": numbers })).unwrap();
        let mut hashing = Hashing::new();
        hashing.write_all(text.as_bytes()).unwrap();
        assert_eq!(scan(text.as_bytes()).unwrap().digest, hashing.finish(), "{text}");
    }

    #[test]
    fn malformed_bytes_are_errors() {
        for text in ["", "{", "[1,2]", "{\"a\":1} x", "{\"a\":}"] {
            assert!(scan(text.as_bytes()).is_err(), "{text}");
        }
    }
}
