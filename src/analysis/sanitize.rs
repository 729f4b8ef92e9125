//! One rule that keeps NaN and ±Inf out of a [`Report`], for every key the report has or will
//! have (no list of fields to keep in step):
//!
//! - a non-finite number inside an optional value (`Option`) nulls the innermost such value
//!   (`mode.linewidth_hz`, the whole `mode.fit_band_hz` pair, the whole `rms` section when
//!   `rms.v` is not finite);
//! - one inside a list element drops that element (a stray peak with a non-finite height);
//! - one in a required number (`welch.*`) becomes 0;
//!
//! and each is named in a note ("`<key>`: the computed value was not finite and was dropped").
//! The report's own serialisation is walked to find them, so a new field is covered the day
//! it is added.

use std::fmt;

use serde::Serialize;
use serde::ser::{self, Serializer};
use serde_json::Value;

use crate::report::Report;

/// Replaces every non-finite number of `report` by the rule of the module doc.
pub(crate) fn sanitize(report: &mut Report) {
    sanitize_where(report, |x| !x.is_finite());
}

/// [`sanitize`] with the test for a bad number given (the tests mark numbers with a
/// sentinel, since serde cannot carry NaN through a `Value`).
fn sanitize_where(report: &mut Report, is_bad: impl Fn(f64) -> bool) {
    let mut walk = Walk {
        is_bad: &is_bad,
        path: Vec::new(),
        cut: None,
        counters: Vec::new(),
        pending_key: None,
        found: Vec::new(),
    };
    if report.serialize(&mut walk).is_err() || walk.found.is_empty() {
        return;
    }
    let found = walk.found;
    let Ok(mut value) = serde_json::to_value(&*report) else {
        return;
    };
    let mut removals: Vec<&[Seg]> = Vec::new();
    for f in &found {
        match f.cut {
            Some((n, Cut::Null)) => {
                if let Some(v) = at(&mut value, &f.path[..n]) {
                    *v = Value::Null;
                }
            }
            Some((n, Cut::Remove)) => removals.push(&f.path[..n]),
            None => {
                if let Some(v) = at(&mut value, &f.path) {
                    *v = Value::from(0.0);
                }
            }
        }
    }
    // Highest index first, so that earlier removals do not shift later ones.
    removals.sort();
    removals.dedup();
    for p in removals.iter().rev() {
        if let Some((Seg::Index(i), parent)) = p.split_last()
            && let Some(Value::Array(items)) = at(&mut value, parent)
            && *i < items.len()
        {
            items.remove(*i);
        }
    }
    if let Ok(clean) = serde_json::from_value::<Report>(value) {
        *report = clean;
    }
    for f in &found {
        report.notes.push(format!(
            "{}: the computed value was not finite and was dropped",
            dotted(&f.path)
        ));
    }
}

/// One step of a path into the serialised report.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
enum Seg {
    Key(String),
    Index(usize),
}

/// What a bad number takes with it: the value at the path prefix is nulled or removed.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Cut {
    Null,
    Remove,
}

#[derive(Debug)]
struct Found {
    path: Vec<Seg>,
    cut: Option<(usize, Cut)>,
}

fn dotted(path: &[Seg]) -> String {
    let mut s = String::new();
    for seg in path {
        match seg {
            Seg::Key(k) => {
                if !s.is_empty() {
                    s.push('.');
                }
                s.push_str(k);
            }
            Seg::Index(i) => s.push_str(&format!("[{i}]")),
        }
    }
    s
}

fn at<'v>(value: &'v mut Value, path: &[Seg]) -> Option<&'v mut Value> {
    let mut v = value;
    for seg in path {
        v = match seg {
            Seg::Key(k) => v.get_mut(k.as_str())?,
            Seg::Index(i) => v.get_mut(*i)?,
        };
    }
    Some(v)
}

/// A serializer that writes nothing: it walks the value and records where the bad numbers
/// are and which enclosing value may be nulled (an `Option`) or dropped (a list element).
struct Walk<'a> {
    is_bad: &'a dyn Fn(f64) -> bool,
    path: Vec<Seg>,
    cut: Option<(usize, Cut)>,
    counters: Vec<usize>,
    pending_key: Option<String>,
    found: Vec<Found>,
}

impl Walk<'_> {
    fn number(&mut self, x: f64) {
        if (self.is_bad)(x) {
            self.found.push(Found {
                path: self.path.clone(),
                cut: self.cut,
            });
        }
    }

    fn nested<T: Serialize + ?Sized>(
        &mut self,
        seg: Seg,
        cut: Option<Cut>,
        value: &T,
    ) -> Result<(), WalkError> {
        self.path.push(seg);
        let saved = self.cut;
        if let Some(c) = cut {
            self.cut = Some((self.path.len(), c));
        }
        let r = value.serialize(&mut *self);
        self.cut = saved;
        self.path.pop();
        r
    }

    fn element<T: Serialize + ?Sized>(&mut self, cut: Option<Cut>, value: &T) -> WalkResult {
        let i = self.counters.last().copied().unwrap_or(0);
        if let Some(c) = self.counters.last_mut() {
            *c += 1;
        }
        self.nested(Seg::Index(i), cut, value)
    }

    fn open(&mut self) -> WalkResult<&mut Self> {
        self.counters.push(0);
        Ok(self)
    }

    fn close(&mut self) -> WalkResult {
        self.counters.pop();
        Ok(())
    }
}

#[derive(Debug)]
struct WalkError(String);

impl fmt::Display for WalkError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for WalkError {}

impl ser::Error for WalkError {
    fn custom<T: fmt::Display>(msg: T) -> Self {
        Self(msg.to_string())
    }
}

type WalkResult<T = ()> = Result<T, WalkError>;

impl Serializer for &mut Walk<'_> {
    type Ok = ();
    type Error = WalkError;
    type SerializeSeq = Self;
    type SerializeTuple = Self;
    type SerializeTupleStruct = Self;
    type SerializeTupleVariant = Self;
    type SerializeMap = Self;
    type SerializeStruct = Self;
    type SerializeStructVariant = Self;

    fn serialize_bool(self, _: bool) -> WalkResult {
        Ok(())
    }
    fn serialize_i8(self, _: i8) -> WalkResult {
        Ok(())
    }
    fn serialize_i16(self, _: i16) -> WalkResult {
        Ok(())
    }
    fn serialize_i32(self, _: i32) -> WalkResult {
        Ok(())
    }
    fn serialize_i64(self, _: i64) -> WalkResult {
        Ok(())
    }
    fn serialize_u8(self, _: u8) -> WalkResult {
        Ok(())
    }
    fn serialize_u16(self, _: u16) -> WalkResult {
        Ok(())
    }
    fn serialize_u32(self, _: u32) -> WalkResult {
        Ok(())
    }
    fn serialize_u64(self, _: u64) -> WalkResult {
        Ok(())
    }
    fn serialize_f32(self, v: f32) -> WalkResult {
        self.number(f64::from(v));
        Ok(())
    }
    fn serialize_f64(self, v: f64) -> WalkResult {
        self.number(v);
        Ok(())
    }
    fn serialize_char(self, _: char) -> WalkResult {
        Ok(())
    }
    fn serialize_str(self, _: &str) -> WalkResult {
        Ok(())
    }
    fn serialize_bytes(self, _: &[u8]) -> WalkResult {
        Ok(())
    }
    fn serialize_none(self) -> WalkResult {
        Ok(())
    }
    fn serialize_some<T: Serialize + ?Sized>(self, value: &T) -> WalkResult {
        let saved = self.cut;
        self.cut = Some((self.path.len(), Cut::Null));
        let r = value.serialize(&mut *self);
        self.cut = saved;
        r
    }
    fn serialize_unit(self) -> WalkResult {
        Ok(())
    }
    fn serialize_unit_struct(self, _: &'static str) -> WalkResult {
        Ok(())
    }
    fn serialize_unit_variant(self, _: &'static str, _: u32, _: &'static str) -> WalkResult {
        Ok(())
    }
    fn serialize_newtype_struct<T: Serialize + ?Sized>(
        self,
        _: &'static str,
        value: &T,
    ) -> WalkResult {
        value.serialize(self)
    }
    fn serialize_newtype_variant<T: Serialize + ?Sized>(
        self,
        _: &'static str,
        _: u32,
        variant: &'static str,
        value: &T,
    ) -> WalkResult {
        self.nested(Seg::Key(variant.to_string()), None, value)
    }
    fn serialize_seq(self, _: Option<usize>) -> WalkResult<Self> {
        self.open()
    }
    fn serialize_tuple(self, _: usize) -> WalkResult<Self> {
        self.open()
    }
    fn serialize_tuple_struct(self, _: &'static str, _: usize) -> WalkResult<Self> {
        self.open()
    }
    fn serialize_tuple_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> WalkResult<Self> {
        self.open()
    }
    fn serialize_map(self, _: Option<usize>) -> WalkResult<Self> {
        Ok(self)
    }
    fn serialize_struct(self, _: &'static str, _: usize) -> WalkResult<Self> {
        Ok(self)
    }
    fn serialize_struct_variant(
        self,
        _: &'static str,
        _: u32,
        _: &'static str,
        _: usize,
    ) -> WalkResult<Self> {
        Ok(self)
    }
}

impl ser::SerializeSeq for &mut Walk<'_> {
    type Ok = ();
    type Error = WalkError;
    fn serialize_element<T: Serialize + ?Sized>(&mut self, value: &T) -> WalkResult {
        self.element(Some(Cut::Remove), value)
    }
    fn end(self) -> WalkResult {
        self.close()
    }
}

impl ser::SerializeTuple for &mut Walk<'_> {
    type Ok = ();
    type Error = WalkError;
    fn serialize_element<T: Serialize + ?Sized>(&mut self, value: &T) -> WalkResult {
        self.element(None, value)
    }
    fn end(self) -> WalkResult {
        self.close()
    }
}

impl ser::SerializeTupleStruct for &mut Walk<'_> {
    type Ok = ();
    type Error = WalkError;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, value: &T) -> WalkResult {
        self.element(None, value)
    }
    fn end(self) -> WalkResult {
        self.close()
    }
}

impl ser::SerializeTupleVariant for &mut Walk<'_> {
    type Ok = ();
    type Error = WalkError;
    fn serialize_field<T: Serialize + ?Sized>(&mut self, value: &T) -> WalkResult {
        self.element(None, value)
    }
    fn end(self) -> WalkResult {
        self.close()
    }
}

impl ser::SerializeMap for &mut Walk<'_> {
    type Ok = ();
    type Error = WalkError;
    fn serialize_key<T: Serialize + ?Sized>(&mut self, key: &T) -> WalkResult {
        self.pending_key = Some(match serde_json::to_value(key) {
            Ok(Value::String(s)) => s,
            Ok(other) => other.to_string(),
            Err(e) => return Err(WalkError(e.to_string())),
        });
        Ok(())
    }
    fn serialize_value<T: Serialize + ?Sized>(&mut self, value: &T) -> WalkResult {
        let key = self.pending_key.take().unwrap_or_default();
        self.nested(Seg::Key(key), None, value)
    }
    fn end(self) -> WalkResult {
        Ok(())
    }
}

impl ser::SerializeStruct for &mut Walk<'_> {
    type Ok = ();
    type Error = WalkError;
    fn serialize_field<T: Serialize + ?Sized>(
        &mut self,
        key: &'static str,
        value: &T,
    ) -> WalkResult {
        self.nested(Seg::Key(key.to_string()), None, value)
    }
    fn end(self) -> WalkResult {
        Ok(())
    }
}

impl ser::SerializeStructVariant for &mut Walk<'_> {
    type Ok = ();
    type Error = WalkError;
    fn serialize_field<T: Serialize + ?Sized>(
        &mut self,
        key: &'static str,
        value: &T,
    ) -> WalkResult {
        self.nested(Seg::Key(key.to_string()), None, value)
    }
    fn end(self) -> WalkResult {
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::cross::CrossReport;
    use crate::report::{PeakReport, RmsReport, SidebandReport};

    /// A number no analysis produces, standing in for NaN where serde has to carry it.
    const MARK: f64 = -1234.5;

    /// A report with every section present and every optional number set to [`MARK`]: each
    /// null leaf of the default report's JSON is tried as a number (kept where the type
    /// accepts one), so the test covers fields added later without listing them.
    fn marked_report() -> (Report, Vec<String>) {
        let base = Report {
            sidebands: Some(SidebandReport::default()),
            rms: Some(RmsReport::default()),
            cross: Some(CrossReport::default()),
            peaks: vec![PeakReport::default()],
            ..Report::default()
        };
        let mut value = serde_json::to_value(&base).unwrap();
        let mut marked = Vec::new();
        let mut leaves = Vec::new();
        fn nulls(v: &Value, path: &mut Vec<Seg>, out: &mut Vec<Vec<Seg>>) {
            match v {
                Value::Null => out.push(path.clone()),
                Value::Object(m) => {
                    for (k, x) in m {
                        path.push(Seg::Key(k.clone()));
                        nulls(x, path, out);
                        path.pop();
                    }
                }
                _ => {}
            }
        }
        nulls(&value, &mut Vec::new(), &mut leaves);
        for p in leaves {
            *at(&mut value, &p).unwrap() = Value::from(MARK);
            if serde_json::from_value::<Report>(value.clone()).is_ok() {
                marked.push(dotted(&p));
            } else {
                *at(&mut value, &p).unwrap() = Value::Null;
            }
        }
        (serde_json::from_value(value).unwrap(), marked)
    }

    #[test]
    fn every_optional_number_of_every_section_is_nulled_and_named() {
        let (mut r, marked) = marked_report();
        for section in ["calibration.", "mode.", "quantum.", "sidebands.", "cross."] {
            assert!(
                marked.iter().any(|k| k.starts_with(section)),
                "{section} {marked:?}"
            );
        }
        // The four quantum inputs that the hand-kept list used to miss.
        for k in [
            "quantum.mass_kg",
            "quantum.mass_kg_uncertainty",
            "quantum.bath_temperature_k",
            "quantum.bath_temperature_k_uncertainty",
            "sidebands.red.area_v2",
            "cross.coherence_at_mode",
        ] {
            assert!(marked.iter().any(|m| m == k), "{k} not marked");
        }
        sanitize_where(&mut r, |x| x == MARK || !x.is_finite());
        let json = serde_json::to_value(&r).unwrap();
        for k in &marked {
            let p: Vec<Seg> = k.split('.').map(|s| Seg::Key(s.into())).collect();
            let mut j = json.clone();
            assert_eq!(at(&mut j, &p).cloned(), Some(Value::Null), "{k}");
            let note = format!("{k}: the computed value was not finite and was dropped");
            assert!(r.notes.contains(&note), "{note}");
        }
    }

    #[test]
    fn nan_and_inf_become_null_and_the_json_parses() {
        let mut r = Report {
            sidebands: Some(SidebandReport::default()),
            cross: Some(CrossReport {
                coherence_at_mode: Some(f64::NAN),
                k_eff: 12.0,
                ..CrossReport::default()
            }),
            ..Report::default()
        };
        r.mode.frequency_hz = Some(86_100.0);
        r.mode.linewidth_hz = Some(f64::NAN);
        r.mode.fit_band_hz = Some((85_000.0, f64::INFINITY));
        r.quantum.occupancy = Some(f64::NEG_INFINITY);
        r.quantum.mass_kg = Some(f64::NAN);
        r.welch.k_eff = f64::NAN;
        r.peaks = vec![
            PeakReport {
                frequency_hz: 1.0,
                height_over_floor_db: 12.0,
                linewidth_hz: 3.0,
                new_since_reference: None,
            },
            PeakReport {
                frequency_hz: 2.0,
                height_over_floor_db: f64::NAN,
                linewidth_hz: 3.0,
                new_since_reference: None,
            },
        ];
        r.rms = Some(RmsReport {
            v: f64::NAN,
            ..RmsReport::default()
        });
        sanitize(&mut r);
        let text = serde_json::to_string(&r).unwrap();
        let json: Value = serde_json::from_str(&text).unwrap();
        assert!(!text.contains("NaN") && !text.contains("Infinity"));
        assert_eq!(json["mode"]["frequency_hz"], 86_100.0);
        assert_eq!(json["mode"]["linewidth_hz"], Value::Null);
        assert_eq!(json["mode"]["fit_band_hz"], Value::Null);
        assert_eq!(json["quantum"]["occupancy"], Value::Null);
        assert_eq!(json["quantum"]["mass_kg"], Value::Null);
        assert_eq!(json["cross"]["coherence_at_mode"], Value::Null);
        assert_eq!(json["cross"]["k_eff"], 12.0);
        assert_eq!(json["welch"]["k_eff"], 0.0);
        assert_eq!(r.peaks.len(), 1);
        assert_eq!(r.peaks[0].frequency_hz, 1.0);
        assert!(r.rms.is_none());
        for k in [
            "mode.linewidth_hz",
            "mode.fit_band_hz[1]",
            "quantum.occupancy",
            "peaks[1].height_over_floor_db",
            "rms.v",
            "welch.k_eff",
        ] {
            assert!(
                r.notes.iter().any(|n| n.starts_with(&format!("{k}: "))),
                "{k}: {:?}",
                r.notes
            );
        }
    }

    #[test]
    fn a_finite_report_is_left_untouched() {
        let (mut r, _) = marked_report();
        let before = r.clone();
        sanitize(&mut r);
        assert_eq!(r, before);
    }
}
