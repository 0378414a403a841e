//! Reasons a hit is rejected: a stable machine word and a sentence for people.

use serde::{Deserialize, Serialize};

/// Why a hit was rejected automatically.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Reason {
    /// A second impact after the first pulse had ended.
    DoubleHit,
    /// A sample at or above the overload limit, or a clipped (flat) top, on either channel.
    Overload,
    /// The channel-A peak is below the weak limit.
    Weak,
    /// The force spectrum falls too far inside the band: the tip is too soft for the band.
    TipRolloff,
    /// This hit's FRF disagrees with the station's other hits.
    Outlier,
    /// The hit is too close to the start or end of the recording for a whole record.
    Truncated,
    /// The next tap came before this hit's record ended.
    NextTapInRecord,
    /// The record holds samples that are not numbers (NaN or ∞ in a float recording).
    Corrupt,
}

impl Reason {
    /// Stable machine word (used in `result.json`).
    pub fn word(self) -> &'static str {
        match self {
            Reason::DoubleHit => "double_hit",
            Reason::Overload => "overload",
            Reason::Weak => "weak",
            Reason::TipRolloff => "tip_rolloff",
            Reason::Outlier => "outlier",
            Reason::Truncated => "truncated",
            Reason::NextTapInRecord => "next_tap_in_record",
            Reason::Corrupt => "corrupt_samples",
        }
    }

    /// A sentence for the person at the bench.
    pub fn sentence(self) -> &'static str {
        match self {
            Reason::DoubleHit => {
                "The hammer struck twice: a second impact followed the first. Tap again with a quicker rebound."
            }
            Reason::Overload => {
                "A channel reached full scale (or was clipped flat). Tap softer or lower the input gain."
            }
            Reason::Weak => {
                "The hit is weak (peak below 10 % of full scale and well below this station's other hits). Tap harder or raise the gain."
            }
            Reason::TipRolloff => {
                "This strike was softer than the station's others: its force spectrum rolls off far below theirs. Tap again, crisply."
            }
            Reason::Outlier => {
                "This hit's FRF disagrees with the station's other hits: check the hit location and direction."
            }
            Reason::Truncated => {
                "The hit is too close to the start or end of the recording for a whole record."
            }
            Reason::Corrupt => {
                "The record holds samples that are not numbers (NaN or infinity): the file is damaged there."
            }
            Reason::NextTapInRecord => {
                "The next tap came before this hit's record ended. Wait for the ringing to die down between taps, or shorten the record."
            }
        }
    }
}
