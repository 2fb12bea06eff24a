//! Tag names and source quality words, as every reader of plant data
//! (the MQTT decoder, the historian CSV reader) turns them into the
//! engine's tag ids and [`Quality`].

use super::{Engine, Quality, TagId};
use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

/// A small, fast hasher for tag names (FNV-1a).
#[derive(Default)]
pub struct Fnv(u64);

impl Hasher for Fnv {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        let mut h = if self.0 == 0 { 0xcbf2_9ce4_8422_2325 } else { self.0 };
        for b in bytes {
            h ^= *b as u64;
            h = h.wrapping_mul(0x0100_0000_01b3);
        }
        self.0 = h;
    }
}

/// Tag name to id map used by decoders.
pub type TagIndex = HashMap<String, TagId, BuildHasherDefault<Fnv>>;

/// Build the tag index of an engine.
pub fn tag_index(engine: &Engine) -> TagIndex {
    engine.plan().tags.iter().enumerate().map(|(i, t)| (t.name.clone(), i as TagId)).collect()
}

/// Tag name (as bytes) to id: the historian CSV reader looks tags up
/// before it checks their text, since a known name is valid UTF-8.
pub type TagBytesIndex = HashMap<Box<[u8]>, TagId, BuildHasherDefault<Fnv>>;

/// Build the byte-keyed tag index of an engine.
pub fn tag_bytes_index(engine: &Engine) -> TagBytesIndex {
    engine.plan().tags.iter().enumerate().map(|(i, t)| (t.name.as_bytes().into(), i as TagId)).collect()
}

/// Parse a quality word.
pub fn parse_quality(s: &str) -> Option<Quality> {
    match s.trim() {
        "" | "good" | "Good" | "GOOD" | "g" | "192" => Some(Quality::Good),
        "uncertain" | "Uncertain" | "UNCERTAIN" | "u" | "64" => Some(Quality::Uncertain),
        "bad" | "Bad" | "BAD" | "b" | "0" => Some(Quality::Bad),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quality_words() {
        assert_eq!(parse_quality(""), Some(Quality::Good));
        assert_eq!(parse_quality(" bad "), Some(Quality::Bad));
        assert_eq!(parse_quality("64"), Some(Quality::Uncertain));
        assert_eq!(parse_quality("maybe"), None);
    }
}
