//! Location classes: where a fix came from and how good it is.
//!
//! Argos assigns every location one of seven classes. The accuracy bands below are the
//! figures the system operator publishes for classes 3–0 (common practice; quoted from
//! memory of the operator's user manual). They are nominal 1-sigma radii, and validation
//! studies find the real errors larger and longer-tailed, which is why the state-space
//! smoother estimates error instead of trusting the bands.
//!
//! | class | nominal accuracy | use |
//! |---|---|---|
//! | 3 | < 250 m | kept |
//! | 2 | 250–500 m | kept |
//! | 1 | 500–1500 m | kept |
//! | 0 | > 1500 m | kept |
//! | A | no estimate (3 messages received) | kept |
//! | B | no estimate (1–2 messages received) | kept |
//! | Z | invalid location (failed plausibility checks) | **excluded at ingest** |
//!
//! GPS fixes (`GPS`, `G`) and Fastloc-GPS fixes (`FGPS`, `F`, `FASTLOC`) may be mixed with
//! Argos fixes in one track; both are treated as far better than any Argos class.
//!
//! **Quality order** (used to resolve duplicate timestamps): GPS = Fastloc-GPS > 3 > 2 >
//! 1 > 0 > A > B. Between two fixes of equal class, the one with the smaller error-ellipse
//! semi-major axis wins, then the one read first.

use serde::{Deserialize, Serialize};

/// A location class.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub enum LocClass {
    /// A GPS fix.
    Gps,
    /// A Fastloc-GPS fix (snapshot GPS solved on shore).
    FastlocGps,
    /// Argos class 3 (< 250 m nominal).
    Argos3,
    /// Argos class 2 (250–500 m nominal).
    Argos2,
    /// Argos class 1 (500–1500 m nominal).
    Argos1,
    /// Argos class 0 (> 1500 m nominal).
    Argos0,
    /// Argos class A (no accuracy estimate).
    ArgosA,
    /// Argos class B (no accuracy estimate).
    ArgosB,
    /// Argos class Z (invalid; never kept).
    ArgosZ,
}

impl LocClass {
    /// Every class in quality order, best first.
    pub const ALL: [LocClass; 9] = [
        LocClass::Gps,
        LocClass::FastlocGps,
        LocClass::Argos3,
        LocClass::Argos2,
        LocClass::Argos1,
        LocClass::Argos0,
        LocClass::ArgosA,
        LocClass::ArgosB,
        LocClass::ArgosZ,
    ];

    /// Reads a class code as found in data files (case-insensitive, surrounding blanks
    /// ignored). Returns `None` for anything unknown.
    ///
    /// # Examples
    /// ```
    /// use cairn::tracks::class::LocClass;
    /// assert_eq!(LocClass::parse("a"), Some(LocClass::ArgosA));
    /// assert_eq!(LocClass::parse(" 3 "), Some(LocClass::Argos3));
    /// assert_eq!(LocClass::parse("Fastloc"), Some(LocClass::FastlocGps));
    /// assert_eq!(LocClass::parse("4"), None);
    /// ```
    pub fn parse(s: &str) -> Option<LocClass> {
        // Compared without building an upper-cased copy: this runs once per input row.
        const CODES: [(&str, LocClass); 14] = [
            ("3", LocClass::Argos3),
            ("2", LocClass::Argos2),
            ("1", LocClass::Argos1),
            ("0", LocClass::Argos0),
            ("A", LocClass::ArgosA),
            ("B", LocClass::ArgosB),
            ("Z", LocClass::ArgosZ),
            ("G", LocClass::Gps),
            ("GPS", LocClass::Gps),
            ("F", LocClass::FastlocGps),
            ("FGPS", LocClass::FastlocGps),
            ("FASTLOC", LocClass::FastlocGps),
            ("FASTLOC-GPS", LocClass::FastlocGps),
            ("FASTLOCGPS", LocClass::FastlocGps),
        ];
        let t = s.trim();
        CODES
            .iter()
            .find(|(code, _)| code.eq_ignore_ascii_case(t))
            .map(|&(_, class)| class)
    }

    /// The code written to output tables.
    pub fn code(self) -> &'static str {
        match self {
            LocClass::Gps => "GPS",
            LocClass::FastlocGps => "FGPS",
            LocClass::Argos3 => "3",
            LocClass::Argos2 => "2",
            LocClass::Argos1 => "1",
            LocClass::Argos0 => "0",
            LocClass::ArgosA => "A",
            LocClass::ArgosB => "B",
            LocClass::ArgosZ => "Z",
        }
    }

    /// Position in [`LocClass::ALL`], for per-class tallies.
    pub(crate) fn index(self) -> usize {
        self as usize
    }

    /// Whether fixes of this class are usable (everything except Argos Z).
    pub fn is_valid(self) -> bool {
        self != LocClass::ArgosZ
    }

    /// Quality rank, 0 best. GPS and Fastloc-GPS share rank 0.
    pub fn rank(self) -> u8 {
        match self {
            LocClass::Gps | LocClass::FastlocGps => 0,
            LocClass::Argos3 => 1,
            LocClass::Argos2 => 2,
            LocClass::Argos1 => 3,
            LocClass::Argos0 => 4,
            LocClass::ArgosA => 5,
            LocClass::ArgosB => 6,
            LocClass::ArgosZ => 7,
        }
    }

    /// Whether the class comes from Argos Doppler positioning.
    pub fn is_argos(self) -> bool {
        self.rank() > 0
    }
}

impl std::fmt::Display for LocClass {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.code())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_code_round_trips() {
        for c in LocClass::ALL {
            assert_eq!(LocClass::parse(c.code()), Some(c));
        }
    }

    #[test]
    fn index_is_the_position_in_all() {
        for (i, c) in LocClass::ALL.into_iter().enumerate() {
            assert_eq!(c.index(), i);
        }
    }

    #[test]
    fn quality_order_is_gps_then_argos_3_to_b() {
        let ranks: Vec<u8> = LocClass::ALL.iter().map(|c| c.rank()).collect();
        assert!(ranks.windows(2).all(|w| w[0] <= w[1]));
        assert!(LocClass::Argos3.rank() < LocClass::ArgosB.rank());
        assert!(!LocClass::ArgosZ.is_valid());
    }
}
