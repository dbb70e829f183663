//! The value wrapper every number of a group report travels in, so that a suppressed or
//! not-computable figure is explicit data rather than a missing key or a magic number.

use serde::ser::{Serialize, SerializeMap, Serializer};

/// One figure of a group report as the templates may show it.
///
/// Serialised as `{"value": …}`, `{"suppressed": true}` or `{"not_available": true}`.
/// Templates should print a suppressed figure with one neutral mark (e.g. "suppressed"): a
/// complementary suppression hides cells of any size, so printing "<11" would be wrong for them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Shown<T> {
    /// The figure may be shown.
    Value(T),
    /// Hidden by small-cell suppression (primary or complementary) or because a count it is
    /// computed from is hidden.
    Suppressed,
    /// Not computable from the data (e.g. a mean of no values, an interval from one value).
    NotAvailable,
    /// Hidden, but known to lie between `lo` and `hi` (inclusive) from what the report already
    /// shows and the suppression rule itself (for a count); a share or mean computed from such
    /// a count carries the matching range. Showing the range tells a reader nothing they could
    /// not work out from the rest of the report.
    Range {
        /// Lowest value consistent with everything shown.
        lo: T,
        /// Highest value consistent with everything shown.
        hi: T,
    },
}

impl<T> Shown<T> {
    /// The figure, if it may be shown.
    pub fn value(&self) -> Option<&T> {
        match self {
            Shown::Value(v) => Some(v),
            _ => None,
        }
    }

    /// True when hidden by suppression (with or without a range).
    pub fn is_suppressed(&self) -> bool {
        matches!(self, Shown::Suppressed | Shown::Range { .. })
    }

    /// `Value` from `Some`, `NotAvailable` from `None`; `Suppressed` whenever `hidden`.
    pub fn from_option(v: Option<T>, hidden: bool) -> Self {
        match (hidden, v) {
            (true, _) => Shown::Suppressed,
            (false, Some(v)) => Shown::Value(v),
            (false, None) => Shown::NotAvailable,
        }
    }
}

impl<T: Serialize> Serialize for Shown<T> {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let mut map = serializer.serialize_map(None)?;
        match self {
            Shown::Value(v) => map.serialize_entry("value", v)?,
            Shown::Suppressed => map.serialize_entry("suppressed", &true)?,
            Shown::NotAvailable => map.serialize_entry("not_available", &true)?,
            Shown::Range { lo, hi } => {
                map.serialize_entry("suppressed", &true)?;
                map.serialize_entry("at_least", lo)?;
                map.serialize_entry("at_most", hi)?;
            }
        }
        map.end()
    }
}

/// A two-sided confidence interval.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Interval {
    /// Lower limit.
    pub lo: f64,
    /// Upper limit.
    pub hi: f64,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn serialisation_is_explicit() {
        assert_eq!(
            serde_json::to_string(&Shown::Value(3u64)).unwrap(),
            r#"{"value":3}"#
        );
        assert_eq!(
            serde_json::to_string(&Shown::<u64>::Suppressed).unwrap(),
            r#"{"suppressed":true}"#
        );
        assert_eq!(
            serde_json::to_string(&Shown::<f64>::NotAvailable).unwrap(),
            r#"{"not_available":true}"#
        );
        assert_eq!(Shown::from_option(Some(1), true), Shown::Suppressed);
        assert_eq!(Shown::<u8>::from_option(None, false), Shown::NotAvailable);
    }
}
