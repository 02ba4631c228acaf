//! The names serde reads and writes, taken from the derives themselves so that no
//! list is kept by hand beside them: an enum value's word (`tanh`, `target_loss`,
//! `train`), an enum's words, and a settings struct's keys.

use serde::de::{self, DeserializeOwned, Deserializer, Visitor};
use serde::{Serialize, forward_to_deserialize_any};

/// The word serde writes for a unit enum value: its name after `rename_all`.
///
/// Every enum stet names in a document, a summary or a cache file (step kinds,
/// settings, metrics, stop reasons, entry kinds) goes through here.
pub(crate) fn word<T: Serialize>(value: &T) -> &'static str {
    serde_variant::to_variant_name(value)
        .expect("words are taken only from enum values without fields")
}

/// The keys a struct's serde derive reads, in declaration order: the list serde
/// itself checks unknown keys against.
pub(crate) fn fields<T: DeserializeOwned>() -> &'static [&'static str] {
    names_given_to_serde::<T>().expect("a struct with named fields")
}

/// The words a unit enum's serde derive reads, in declaration order.
pub(crate) fn words<T: DeserializeOwned>() -> &'static [&'static str] {
    names_given_to_serde::<T>().expect("an enum")
}

/// Starts deserialising `T` from a source that only listens: serde's derive hands
/// `deserialize_struct` its field names and `deserialize_enum` its variant names,
/// and the source stops there.
fn names_given_to_serde<T: DeserializeOwned>() -> Option<&'static [&'static str]> {
    let mut listener = Listener { names: None };
    // The listener always stops the deserialisation; only what it heard matters.
    let _ = T::deserialize(&mut listener);
    listener.names
}

struct Listener {
    names: Option<&'static [&'static str]>,
}

/// Why the listener stopped: it never produces a value.
#[derive(Debug)]
struct Stopped;

impl std::fmt::Display for Stopped {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("only the names were read")
    }
}

impl std::error::Error for Stopped {}

impl de::Error for Stopped {
    fn custom<M: std::fmt::Display>(_: M) -> Self {
        Stopped
    }
}

impl<'de> Deserializer<'de> for &mut Listener {
    type Error = Stopped;

    fn deserialize_any<V: Visitor<'de>>(self, _: V) -> Result<V::Value, Stopped> {
        Err(Stopped)
    }

    fn deserialize_struct<V: Visitor<'de>>(
        self,
        _: &'static str,
        fields: &'static [&'static str],
        _: V,
    ) -> Result<V::Value, Stopped> {
        self.names = Some(fields);
        Err(Stopped)
    }

    fn deserialize_enum<V: Visitor<'de>>(
        self,
        _: &'static str,
        variants: &'static [&'static str],
        _: V,
    ) -> Result<V::Value, Stopped> {
        self.names = Some(variants);
        Err(Stopped)
    }

    forward_to_deserialize_any! {
        bool i8 i16 i32 i64 i128 u8 u16 u32 u64 u128 f32 f64 char str string bytes
        byte_buf option unit unit_struct newtype_struct seq tuple tuple_struct map
        identifier ignored_any
    }
}

#[cfg(test)]
mod tests {
    use serde::Deserialize;

    use super::*;

    #[derive(Serialize, Deserialize)]
    #[serde(rename_all = "snake_case")]
    enum Stop {
        TargetLoss,
        #[serde(rename = "limit")]
        EpochLimit,
    }

    #[derive(Deserialize)]
    #[allow(dead_code)] // only the field names matter
    struct Settings {
        learning_rate: f64,
        #[serde(rename = "l2")]
        weight_decay: f64,
    }

    #[test]
    fn a_word_is_the_name_serde_writes_after_renaming() {
        assert_eq!(word(&Stop::TargetLoss), "target_loss");
        assert_eq!(word(&Stop::EpochLimit), "limit");
    }

    #[test]
    fn words_and_fields_are_the_names_serde_reads() {
        assert_eq!(words::<Stop>(), ["target_loss", "limit"]);
        assert_eq!(fields::<Settings>(), ["learning_rate", "l2"]);
    }
}
