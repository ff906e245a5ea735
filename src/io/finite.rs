//! A guard on JSON outputs: serde_json writes a NaN or an infinity as `null`, which a reader
//! cannot tell from a figure that does not apply, so a document is walked before it is
//! written and refused, naming the key, if any number in it is not finite.

use std::fmt::{self, Display};

use serde::Serialize;
use serde::ser;

/// The key path (`.trend.tails[0].var = NaN`) of the first non-finite number in `value`.
pub fn first_non_finite<T: Serialize + ?Sized>(value: &T) -> Option<String> {
    match value.serialize(Checker {
        path: String::new(),
    }) {
        Err(Stop::NonFinite(at)) => Some(at),
        // Anything else is for the real serializer to report.
        _ => None,
    }
}

#[derive(Debug)]
enum Stop {
    NonFinite(String),
    Other,
}

impl Display for Stop {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Stop::NonFinite(at) => write!(f, "{at} is not finite"),
            Stop::Other => f.write_str("not checked"),
        }
    }
}

impl std::error::Error for Stop {}

impl ser::Error for Stop {
    fn custom<T: Display>(_: T) -> Self {
        Stop::Other
    }
}

/// Serializes nothing; fails at the first non-finite number, with its path.
struct Checker {
    path: String,
}

type Checked = Result<(), Stop>;

impl Checker {
    fn key(&self, key: impl Display) -> Checker {
        Checker {
            path: format!("{}.{key}", self.path),
        }
    }

    fn index(&self, i: usize) -> Checker {
        Checker {
            path: format!("{}[{i}]", self.path),
        }
    }

    fn number(&self, value: f64) -> Checked {
        if value.is_finite() {
            Ok(())
        } else {
            Err(Stop::NonFinite(format!("{} = {value}", self.path)))
        }
    }
}

impl ser::Serializer for Checker {
    type Ok = ();
    type Error = Stop;
    type SerializeSeq = Seq;
    type SerializeTuple = Seq;
    type SerializeTupleStruct = Seq;
    type SerializeTupleVariant = Seq;
    type SerializeMap = Map;
    type SerializeStruct = Checker;
    type SerializeStructVariant = Checker;

    fn serialize_bool(self, _: bool) -> Checked {
        Ok(())
    }
    fn serialize_i8(self, _: i8) -> Checked {
        Ok(())
    }
    fn serialize_i16(self, _: i16) -> Checked {
        Ok(())
    }
    fn serialize_i32(self, _: i32) -> Checked {
        Ok(())
    }
    fn serialize_i64(self, _: i64) -> Checked {
        Ok(())
    }
    fn serialize_u8(self, _: u8) -> Checked {
        Ok(())
    }
    fn serialize_u16(self, _: u16) -> Checked {
        Ok(())
    }
    fn serialize_u32(self, _: u32) -> Checked {
        Ok(())
    }
    fn serialize_u64(self, _: u64) -> Checked {
        Ok(())
    }
    fn serialize_f32(self, v: f32) -> Checked {
        self.number(f64::from(v))
    }
    fn serialize_f64(self, v: f64) -> Checked {
        self.number(v)
    }
    fn serialize_char(self, _: char) -> Checked {
        Ok(())
    }
    fn serialize_str(self, _: &str) -> Checked {
        Ok(())
    }
    fn serialize_bytes(self, _: &[u8]) -> Checked {
        Ok(())
    }
    fn serialize_none(self) -> Checked {
        Ok(())
    }
    fn serialize_some<T: Serialize + ?Sized>(self, value: &T) -> Checked {
        value.serialize(self)
    }
    fn serialize_unit(self) -> Checked {
        Ok(())
    }
    fn serialize_unit_struct(self, _: &'static str) -> Checked {
        Ok(())
    }
    fn serialize_unit_variant(self, _: &'static str, _: u32, _: &'static str) -> Checked {
        Ok(())
    }
    fn serialize_newtype_struct<T: Serialize + ?Sized>(
        self,
        _: &'static str,
        value: &T,
    ) -> Checked {
        value.serialize(self)
    }
    fn serialize_newtype_variant<T: Serialize + ?Sized>(
        self,
        _: &'static str,
        _: u32,
        variant: &'static str,
        value: &T,
    ) -> Checked {
        value.serialize(self.key(variant))
    }
    fn serialize_seq(self, _: Option<usize>) -> Result<Seq, Stop> {
        Ok(Seq {
            base: self,
            next: 0,
        })
    }
    fn serialize_tuple(self, _: usize) -> Result<Seq, Stop> {
        self.serialize_seq(None)
    }
    fn serialize_tuple_struct(self, _: &'static str, _: usize) -> Result<Seq, Stop> {
        self.serialize_seq(None)
    }
    fn serialize_tuple_variant(
        self,
        _: &'static str,
        _: u32,
        variant: &'static str,
        _: usize,
    ) -> Result<Seq, Stop> {
        self.key(variant).serialize_seq(None)
    }
    fn serialize_map(self, _: Option<usize>) -> Result<Map, Stop> {
        Ok(Map {
            base: self,
            key: String::new(),
        })
    }
    fn serialize_struct(self, _: &'static str, _: usize) -> Result<Checker, Stop> {
        Ok(self)
    }
    fn serialize_struct_variant(
        self,
        _: &'static str,
        _: u32,
        variant: &'static str,
        _: usize,
    ) -> Result<Checker, Stop> {
        Ok(self.key(variant))
    }
}

/// A sequence being checked: elements are named by index.
struct Seq {
    base: Checker,
    next: usize,
}

impl Seq {
    fn element<T: Serialize + ?Sized>(&mut self, value: &T) -> Checked {
        let at = self.base.index(self.next);
        self.next += 1;
        value.serialize(at)
    }
}

impl ser::SerializeSeq for Seq {
    type Ok = ();
    type Error = Stop;
    fn serialize_element<T: Serialize + ?Sized>(&mut self, value: &T) -> Checked {
        self.element(value)
    }
    fn end(self) -> Checked {
        Ok(())
    }
}

impl ser::SerializeTuple for Seq {
    type Ok = ();
    type Error = Stop;
    fn serialize_element<T: Serialize + ?Sized>(&mut self, value: &T) -> Checked {
        self.element(value)
    }
    fn end(self) -> Checked {
        Ok(())
    }
}

impl ser::SerializeTupleStruct for Seq {
    type Ok = ();
    type Error = Stop;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, value: &T) -> Checked {
        self.element(value)
    }
    fn end(self) -> Checked {
        Ok(())
    }
}

impl ser::SerializeTupleVariant for Seq {
    type Ok = ();
    type Error = Stop;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, value: &T) -> Checked {
        self.element(value)
    }
    fn end(self) -> Checked {
        Ok(())
    }
}

/// A map being checked: values are named by their key.
struct Map {
    base: Checker,
    key: String,
}

impl ser::SerializeMap for Map {
    type Ok = ();
    type Error = Stop;
    fn serialize_key<T: Serialize + ?Sized>(&mut self, key: &T) -> Checked {
        self.key = match serde_json::to_value(key) {
            Ok(serde_json::Value::String(text)) => text,
            Ok(other) => other.to_string(),
            Err(_) => "?".to_string(),
        };
        Ok(())
    }
    fn serialize_value<T: Serialize + ?Sized>(&mut self, value: &T) -> Checked {
        value.serialize(self.base.key(&self.key))
    }
    fn end(self) -> Checked {
        Ok(())
    }
}

impl ser::SerializeStruct for Checker {
    type Ok = ();
    type Error = Stop;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, key: &'static str, value: &T) -> Checked {
        value.serialize(self.key(key))
    }
    fn end(self) -> Checked {
        Ok(())
    }
}

impl ser::SerializeStructVariant for Checker {
    type Ok = ();
    type Error = Stop;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, key: &'static str, value: &T) -> Checked {
        value.serialize(self.key(key))
    }
    fn end(self) -> Checked {
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    #[derive(Serialize)]
    struct Tail {
        level: f64,
        var: f64,
    }

    #[derive(Serialize)]
    struct Doc {
        name: &'static str,
        tails: Vec<Tail>,
        optional: Option<f64>,
        #[serde(flatten)]
        extra: BTreeMap<String, f64>,
    }

    fn doc(var: f64, extra: f64) -> Doc {
        Doc {
            name: "x",
            tails: vec![
                Tail {
                    level: 0.5,
                    var: 1.0,
                },
                Tail { level: 0.995, var },
            ],
            optional: None,
            extra: BTreeMap::from([("e".to_string(), extra)]),
        }
    }

    #[test]
    fn the_first_non_finite_number_is_named_by_its_path() {
        assert_eq!(first_non_finite(&doc(2.0, 3.0)), None);
        assert_eq!(
            first_non_finite(&doc(f64::NAN, 3.0)).as_deref(),
            Some(".tails[1].var = NaN")
        );
        assert_eq!(
            first_non_finite(&doc(2.0, f64::NEG_INFINITY)).as_deref(),
            Some(".e = -inf")
        );
        let value = serde_json::json!({ "a": [1.0, 2.5], "b": { "c": 3 } });
        assert_eq!(first_non_finite(&value), None);
    }
}
