//! Physical units of the channels and the parsing of sensitivities such as `10mV/g`.

use serde::{Deserialize, Serialize};
use thiserror::Error;

/// Standard gravity, m/s² (CGPM 1901; ISO 80000-3).
pub const STANDARD_GRAVITY_M_S2: f64 = 9.806_65;

/// What a channel measures, in SI units.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Quantity {
    /// Force in newtons (instrumented hammer).
    Force,
    /// Acceleration in m/s² (accelerometer).
    Acceleration,
}

impl Quantity {
    /// SI unit symbol.
    pub fn si_unit(self) -> &'static str {
        match self {
            Quantity::Force => "N",
            Quantity::Acceleration => "m/s²",
        }
    }
}

/// A channel sensitivity, stored in millivolts per SI unit (mV/N or mV/(m/s²)).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Sensitivity {
    /// Millivolts per SI unit of the channel's quantity.
    pub mv_per_unit: f64,
    /// The quantity this sensitivity refers to, when the user gave a unit; `None` for a bare number.
    pub quantity: Option<Quantity>,
}

/// A sensitivity that could not be read.
#[derive(Debug, Error, PartialEq)]
pub enum SensitivityError {
    /// The text is not a number with an optional unit.
    #[error(
        "cannot read sensitivity {0:?}: expected a number of mV per unit, optionally with a unit such as mV/N, mV/g, mV/(m/s^2), V/N"
    )]
    Malformed(String),
    /// The value is zero, negative or not finite.
    #[error("sensitivity {0:?} must be a positive finite number")]
    NotPositive(String),
    /// The unit does not fit the channel (e.g. mV/g on a force channel).
    #[error("sensitivity {text:?} is for {given}, but this channel measures {wanted}")]
    WrongQuantity {
        /// What the user wrote.
        text: String,
        /// The quantity the unit implies.
        given: &'static str,
        /// The quantity the channel carries.
        wanted: &'static str,
    },
}

impl Sensitivity {
    /// A bare sensitivity in mV per SI unit.
    pub fn mv_per_unit(v: f64) -> Self {
        Self {
            mv_per_unit: v,
            quantity: None,
        }
    }

    /// Volts per SI unit.
    pub fn volts_per_unit(&self) -> f64 {
        self.mv_per_unit * 1e-3
    }

    /// Parses `"2.25"`, `"2.25mV/N"`, `"100 mV/g"`, `"10.2mV/(m/s^2)"`, `"0.1V/g"`.
    pub fn parse(text: &str) -> Result<Self, SensitivityError> {
        let t: String = text.chars().filter(|c| !c.is_whitespace()).collect();
        let split = t
            .find(|c: char| !(c.is_ascii_digit() || matches!(c, '.' | 'e' | 'E' | '+' | '-')))
            .unwrap_or(t.len());
        // "1e-3mV" style: the 'e' search above may swallow nothing wrong, but "mV" starts with 'm'.
        let (num, unit) = t.split_at(split);
        let value: f64 = num
            .parse()
            .map_err(|_| SensitivityError::Malformed(text.to_string()))?;
        if !(value.is_finite() && value > 0.0) {
            return Err(SensitivityError::NotPositive(text.to_string()));
        }
        if unit.is_empty() {
            return Ok(Self::mv_per_unit(value));
        }
        let lower = unit.to_ascii_lowercase().replace('²', "^2");
        let (volt_scale, rest) = if let Some(r) = lower.strip_prefix("mv/") {
            (1.0, r)
        } else if let Some(r) = lower.strip_prefix("v/") {
            (1000.0, r)
        } else {
            return Err(SensitivityError::Malformed(text.to_string()));
        };
        let (per_unit_scale, quantity) = match rest {
            "n" => (1.0, Quantity::Force),
            "kn" => (1e-3, Quantity::Force),
            "lbf" => (1.0 / 4.448_221_615_260_5, Quantity::Force),
            "g" => (1.0 / STANDARD_GRAVITY_M_S2, Quantity::Acceleration),
            "(m/s^2)" | "m/s^2" | "ms^-2" | "(ms^-2)" | "m/s2" | "(m/s2)" => {
                (1.0, Quantity::Acceleration)
            }
            _ => return Err(SensitivityError::Malformed(text.to_string())),
        };
        Ok(Self {
            mv_per_unit: value * volt_scale * per_unit_scale,
            quantity: Some(quantity),
        })
    }

    /// Checks that an explicit unit matches the channel's quantity.
    pub fn check_quantity(&self, text: &str, wanted: Quantity) -> Result<(), SensitivityError> {
        match self.quantity {
            Some(q) if q != wanted => Err(SensitivityError::WrongQuantity {
                text: text.to_string(),
                given: q.si_unit(),
                wanted: wanted.si_unit(),
            }),
            _ => Ok(()),
        }
    }
}

/// A number for a message: plain where it reads well, in exponent form when very large or very
/// small (an absurd value from a file must not print as 300 digits).
pub fn show(v: f64) -> String {
    let a = v.abs();
    if v != 0.0 && a.is_finite() && !(1e-4..1e7).contains(&a) {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_units() {
        // 100 mV/g = 10.197 mV/(m/s²) (g = 9.80665 m/s², ISO 80000-3).
        let s = Sensitivity::parse("100mV/g").unwrap();
        assert!((s.mv_per_unit - 100.0 / 9.80665).abs() < 1e-12);
        assert_eq!(s.quantity, Some(Quantity::Acceleration));
        assert_eq!(Sensitivity::parse("2.25").unwrap().mv_per_unit, 2.25);
        assert_eq!(Sensitivity::parse("2.25 mV/N").unwrap().mv_per_unit, 2.25);
        assert_eq!(Sensitivity::parse("0.01V/N").unwrap().mv_per_unit, 10.0);
        assert_eq!(
            Sensitivity::parse("10.2mV/(m/s²)").unwrap().mv_per_unit,
            10.2
        );
        assert!(Sensitivity::parse("abc").is_err());
        assert!(Sensitivity::parse("-3").is_err());
        assert!(Sensitivity::parse("3mV/furlong").is_err());
        let g = Sensitivity::parse("10mV/g").unwrap();
        assert!(g.check_quantity("10mV/g", Quantity::Force).is_err());
        assert!(g.check_quantity("10mV/g", Quantity::Acceleration).is_ok());
    }
}
