//! Emission designators of the ITU Radio Regulations, Appendix 1 (`16K0F3E`, `180KF8E`,
//! `8K10F1D`): the necessary bandwidth from the first four characters and the kind of
//! spectrum from the next three, as a [`ModulationClass`] the level model can use.
//!
//! The bandwidth is three digits and one letter standing in the decimal point's place:
//! `H` hertz, `K` kilohertz, `M` megahertz, `G` gigahertz (`400H` 400 Hz, `2K40` 2.4 kHz,
//! `12K5` 12.5 kHz, `180K` 180 kHz, `1M25` 1.25 MHz, `5G65` 5.65 GHz); below 1 Hz the
//! letter stands first (`H002` 0.002 Hz). The first character is never `0`, `K`, `M` or
//! `G`. The classification follows in three symbols: the main carrier's modulation
//! (`N` none, `A` double sideband, `H`/`R`/`J` single sideband, `F` frequency, `G` phase,
//! …), the nature of the modulating signal (`0` none, `1`/`2` digital, `3` analogue,
//! `7`/`8` several digital or analogue channels, `9` composite, `X` other) and the
//! information sent (`N` none, `A`/`B` telegraphy, `C` facsimile, `D` data, `E`
//! telephony and sound broadcasting, `F` television, `W` a combination, `X` other). Two
//! optional symbols of detail may follow; they are checked and not used.
//!
//! ```
//! use pim_core::emission::{parse_designator, ModulationClass};
//! use pim_core::Hz;
//! let d = parse_designator("16K0F3E").unwrap();
//! assert_eq!(d.bandwidth, Hz(16_000));
//! assert_eq!(d.class, Some(ModulationClass::FmVoice));
//! assert_eq!(parse_designator("6K25").unwrap().bandwidth, Hz(6_250));
//! assert!(parse_designator("16KF3E").is_err());
//! ```

use std::fmt;

use serde::Serialize;

use crate::freq::Hz;

/// The kind of spectrum an emission has, for the level model's spectral shape.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ModulationClass {
    /// Analogue FM or PM telephony of land mobile and repeaters (`16K0F3E`, `11K2F3E`).
    FmVoice,
    /// Frequency- or phase-shift keyed data, paging and telemetry (`16K0F1D`, `8K10F1D`).
    FskData,
    /// Narrow digital voice and combinations below 50 kHz (`7K60FXE`, `8K10F1E`, `25K0G7W`).
    NarrowDigital,
    /// Digital emissions of 50 kHz and more (`5M00W7D`, `1M25D7W`).
    WideDigital,
    /// Double-sideband AM sound broadcasting, 9 kHz and wider (`10K0A3E`).
    AmBroadcast,
    /// Double-sideband AM telephony narrower than 9 kHz (aeronautical `6K00A3E`).
    AmVoice,
    /// Single-sideband telephony (`2K80J3E`).
    SsbVoice,
    /// FM sound broadcasting, 100 kHz and wider (`180KF8E`, `256KF8E`).
    FmBroadcast,
    /// No modulation: a plain carrier (`N0N`).
    Unmodulated,
    /// Anything else (television, facsimile, telegraphy, pulses).
    Other,
}

impl ModulationClass {
    /// Every class, in the order of the documentation.
    pub const ALL: [ModulationClass; 10] = [
        ModulationClass::FmVoice,
        ModulationClass::FskData,
        ModulationClass::NarrowDigital,
        ModulationClass::WideDigital,
        ModulationClass::AmBroadcast,
        ModulationClass::AmVoice,
        ModulationClass::SsbVoice,
        ModulationClass::FmBroadcast,
        ModulationClass::Unmodulated,
        ModulationClass::Other,
    ];

    /// The class's name in files and outputs (`fm-voice`, `fsk-data`, …).
    pub fn name(self) -> &'static str {
        match self {
            ModulationClass::FmVoice => "fm-voice",
            ModulationClass::FskData => "fsk-data",
            ModulationClass::NarrowDigital => "narrow-digital",
            ModulationClass::WideDigital => "wide-digital",
            ModulationClass::AmBroadcast => "am-broadcast",
            ModulationClass::AmVoice => "am-voice",
            ModulationClass::SsbVoice => "ssb-voice",
            ModulationClass::FmBroadcast => "fm-broadcast",
            ModulationClass::Unmodulated => "unmodulated",
            ModulationClass::Other => "other",
        }
    }

    /// The class named by `text` ([`ModulationClass::name`], read without regard to case,
    /// spaces, hyphens or underscores: `FM voice`, `fm_voice`).
    pub fn from_name(text: &str) -> Option<ModulationClass> {
        let key: String = text
            .chars()
            .filter(|c| c.is_alphanumeric())
            .flat_map(char::to_lowercase)
            .collect();
        ModulationClass::ALL
            .into_iter()
            .find(|c| c.name().replace('-', "") == key)
    }
}

impl fmt::Display for ModulationClass {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// An emission designator read: its necessary bandwidth and, when the classification
/// symbols are given, the class of its spectrum.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Designator {
    /// The necessary bandwidth, in whole hertz (rounded to the hertz below 1 Hz).
    pub bandwidth: Hz,
    /// The class of the spectrum; `None` for a bandwidth alone (`16K0`).
    pub class: Option<ModulationClass>,
}

/// Why a designator was refused.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct DesignatorError {
    /// The designator as given.
    pub text: String,
    /// What is wrong with it.
    pub reason: String,
}

impl fmt::Display for DesignatorError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "`{}` is not an emission designator ({}); expected the necessary bandwidth \
             and the class, such as 16K0F3E or 11K2F3E (ITU Radio Regulations, Appendix 1)",
            self.text, self.reason
        )
    }
}

impl std::error::Error for DesignatorError {}

/// The necessary bandwidth of Appendix 1's four characters (`16K0`, `180K`, `H002`), in
/// whole hertz.
fn bandwidth_of(code: &[u8]) -> Result<Hz, String> {
    let letters: Vec<usize> = (0..4).filter(|&i| !code[i].is_ascii_digit()).collect();
    let [at] = letters[..] else {
        return Err(
            "the bandwidth needs three digits and one of H, K, M or G in its first four \
             characters"
                .into(),
        );
    };
    let exp = match code[at] {
        b'H' => 0,
        b'K' => 3,
        b'M' => 6,
        b'G' => 9,
        other => {
            return Err(format!(
                "`{}` is not a bandwidth letter (H, K, M or G)",
                other as char
            ))
        }
    };
    if code[0] == b'0' {
        return Err("the bandwidth may not start with 0".into());
    }
    if at == 0 && code[0] != b'H' {
        return Err("only H may stand first (a bandwidth below 1 Hz)".into());
    }
    let digits = |s: &[u8]| s.iter().fold(0i64, |v, b| v * 10 + i64::from(b - b'0'));
    let whole = digits(&code[..at]);
    let fraction = &code[at + 1..4];
    // value = whole.fraction × 10^exp, exactly in hertz (rounded below 1 Hz)
    let scaled =
        (whole * 10i64.pow(fraction.len() as u32) + digits(fraction)) * 10i64.pow(exp as u32);
    let divisor = 10i64.pow(fraction.len() as u32);
    Ok(Hz((scaled + divisor / 2) / divisor))
}

/// The class of the spectrum from Appendix 1's three classification symbols and the
/// bandwidth.
fn class_of(symbols: &[u8], bandwidth: Hz) -> Result<ModulationClass, String> {
    let (modulation, nature, information) = (symbols[0], symbols[1], symbols[2]);
    if !b"NAHRJBCFGDPKLMQVWX".contains(&modulation) {
        return Err(format!(
            "`{}` is not a type of modulation",
            modulation as char
        ));
    }
    if !b"0123789X".contains(&nature) {
        return Err(format!(
            "`{}` is not a nature of the modulating signal",
            nature as char
        ));
    }
    if !b"NABCDEFWX".contains(&information) {
        return Err(format!(
            "`{}` is not a type of information",
            information as char
        ));
    }
    let analogue = matches!(nature, b'3' | b'8' | b'9');
    let digital = matches!(nature, b'1' | b'2' | b'7' | b'X');
    let by_width = |narrow| {
        if bandwidth < Hz(50_000) {
            narrow
        } else {
            ModulationClass::WideDigital
        }
    };
    Ok(match modulation {
        b'N' => ModulationClass::Unmodulated,
        b'A' if analogue && information == b'E' => {
            if bandwidth >= Hz(9_000) {
                ModulationClass::AmBroadcast
            } else {
                ModulationClass::AmVoice
            }
        }
        b'H' | b'R' | b'J' if analogue && information == b'E' => ModulationClass::SsbVoice,
        b'F' | b'G' if analogue && matches!(information, b'E' | b'W') => {
            if bandwidth >= Hz(100_000) {
                ModulationClass::FmBroadcast
            } else {
                ModulationClass::FmVoice
            }
        }
        b'F' | b'G'
            if matches!(nature, b'1' | b'2') && matches!(information, b'A' | b'B' | b'D') =>
        {
            by_width(ModulationClass::FskData)
        }
        b'F' | b'G' | b'D' | b'W' | b'X' | b'K' | b'L' | b'M' | b'Q' | b'V' | b'P'
            if digital && matches!(information, b'D' | b'E' | b'W' | b'X') =>
        {
            by_width(ModulationClass::NarrowDigital)
        }
        _ => ModulationClass::Other,
    })
}

/// Reads an emission designator: the necessary bandwidth alone (`16K0`), or with the
/// three classification symbols (`16K0F3E`) and optionally the two of detail
/// (`16K0F3EJN`). Letters may be written in lower case.
pub fn parse_designator(text: &str) -> Result<Designator, DesignatorError> {
    let t = text.trim();
    let fail = |reason: String| DesignatorError {
        text: t.to_string(),
        reason,
    };
    let code = t.to_ascii_uppercase();
    let bytes = code.as_bytes();
    if !bytes.iter().all(u8::is_ascii_alphanumeric) {
        return Err(fail("only letters and digits belong in it".into()));
    }
    if !matches!(bytes.len(), 4 | 7 | 9) {
        return Err(fail(format!(
            "{} characters; a designator has 4 (bandwidth), 7 or 9",
            t.chars().count()
        )));
    }
    let bandwidth = bandwidth_of(&bytes[..4]).map_err(fail)?;
    if bytes.len() == 4 {
        return Ok(Designator {
            bandwidth,
            class: None,
        });
    }
    let class = class_of(&bytes[4..7], bandwidth).map_err(fail)?;
    if bytes.len() == 9 {
        if !b"ABCDEFGHJKLMNWX".contains(&bytes[7]) {
            return Err(fail(format!(
                "`{}` is not a detail of the signal",
                bytes[7] as char
            )));
        }
        if !b"CFNTWX".contains(&bytes[8]) {
            return Err(fail(format!(
                "`{}` is not a nature of multiplexing",
                bytes[8] as char
            )));
        }
    }
    Ok(Designator {
        bandwidth,
        class: Some(class),
    })
}

/// The bandwidth assumed for an emitter whose file gives none, from its kind (`kind`,
/// `service`): the necessary bandwidth of the designator such stations usually carry
/// (common practice), with the rule's name for the note that says so. `None` when the
/// kind says nothing a default can rest on.
///
/// | kind (words in it) | bandwidth | usual designator |
/// |---|---|---|
/// | fm, fm broadcast | 180 kHz | 180KF8E |
/// | am, am broadcast | 10 kHz | 10K0A3E |
/// | dmr | 7.6 kHz | 7K60FXE |
/// | p25 | 8.1 kHz | 8K10F1E |
/// | nxdn | 4 kHz | 4K00F1E |
/// | tetra | 25 kHz | 25K0G7W |
/// | repeater, land mobile, mobile, base, dispatch, amateur, paging, telemetry | 16 kHz | 16K0F3E |
/// | carrier, beacon, cw | 0 (a plain carrier) | N0N |
pub fn default_bandwidth_for_kind(kind: &str) -> Option<(Hz, &'static str)> {
    let words: Vec<String> = kind
        .split(|c: char| !c.is_alphanumeric())
        .filter(|w| !w.is_empty())
        .map(str::to_lowercase)
        .collect();
    let has = |w: &str| words.iter().any(|x| x == w);
    let only = |w: &str| words.len() == 1 && has(w);
    let broadcast = has("broadcast") || has("broadcasting") || has("bc");
    if (has("fm") && broadcast) || only("fm") || has("fmbroadcast") {
        return Some((Hz(180_000), "FM broadcast 180 kHz"));
    }
    if (has("am") && broadcast) || only("am") || has("ambroadcast") || has("mw") {
        return Some((Hz(10_000), "AM broadcast 10 kHz"));
    }
    for (word, width, rule) in [
        ("dmr", 7_600, "DMR 7.6 kHz"),
        ("p25", 8_100, "P25 8.1 kHz"),
        ("nxdn", 4_000, "NXDN 4 kHz"),
        ("tetra", 25_000, "TETRA 25 kHz"),
    ] {
        if has(word) {
            return Some((Hz(width), rule));
        }
    }
    const VOICE: &[&str] = &[
        "repeater",
        "mobile",
        "base",
        "dispatch",
        "amateur",
        "paging",
        "pager",
        "telemetry",
        "lmr",
        "pmr",
    ];
    if VOICE.iter().any(|w| has(w)) {
        return Some((Hz(16_000), "land mobile 16 kHz"));
    }
    if has("carrier") || has("beacon") || has("cw") || has("unmodulated") {
        return Some((Hz::ZERO, "plain carrier 0 kHz"));
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The bandwidth examples of ITU Radio Regulations Appendix 1, §1 (from memory: the
    /// table of "0.002 Hz = H002" to "5.65 GHz = 5G65").
    #[test]
    fn reads_the_appendix_bandwidth_examples() {
        let cases = [
            ("H002", 0),
            ("H100", 0),
            ("25H3", 25),
            ("400H", 400),
            ("2K40", 2_400),
            ("6K00", 6_000),
            ("12K5", 12_500),
            ("180K", 180_000),
            ("181K", 181_000),
            ("1M25", 1_250_000),
            ("2M00", 2_000_000),
            ("10M0", 10_000_000),
            ("202M", 202_000_000),
            ("5G65", 5_650_000_000),
            ("16K0", 16_000),
            ("11K2", 11_200),
            ("6K25", 6_250),
        ];
        for (text, hz) in cases {
            assert_eq!(parse_designator(text).unwrap().bandwidth, Hz(hz), "{text}");
        }
    }

    /// Classes of common designators (reference-facts: `F3E` analogue FM telephony, `F1D`
    /// FSK data, `F8E` FM broadcast; the others common practice).
    #[test]
    fn classes_common_designators() {
        use ModulationClass::*;
        let cases = [
            ("16K0F3E", 16_000, FmVoice),
            ("11K2F3E", 11_200, FmVoice),
            ("180KF8E", 180_000, FmBroadcast),
            ("256KF8E", 256_000, FmBroadcast),
            ("16K0F1D", 16_000, FskData),
            ("16K0F2D", 16_000, FskData),
            ("8K10F1D", 8_100, FskData),
            ("8K10F1E", 8_100, NarrowDigital),
            ("7K60FXE", 7_600, NarrowDigital),
            ("25K0G7W", 25_000, NarrowDigital),
            ("5M00W7D", 5_000_000, WideDigital),
            ("10K0A3E", 10_000, AmBroadcast),
            ("6K00A3E", 6_000, AmVoice),
            ("2K80J3E", 2_800, SsbVoice),
            ("100HN0N", 100, Unmodulated),
            ("5M75C3F", 5_750_000, Other),
            ("16k0f3e", 16_000, FmVoice),
            ("16K0F3EJN", 16_000, FmVoice),
        ];
        for (text, hz, class) in cases {
            let d = parse_designator(text).unwrap();
            assert_eq!((d.bandwidth, d.class), (Hz(hz), Some(class)), "{text}");
        }
    }

    #[test]
    fn refuses_malformed_designators() {
        let cases = [
            ("16KF3E", "6 characters"),
            ("016KF3E", "may not start with 0"),
            ("K160F3E", "only H may stand first"),
            ("16K0Z3E", "`Z` is not a type of modulation"),
            ("16K0F5E", "`5` is not a nature"),
            ("16K0F3Q", "`Q` is not a type of information"),
            ("1600F3E", "three digits and one of H, K, M or G"),
            ("1KK0F3E", "three digits and one of H, K, M or G"),
            ("16X0F3E", "`X` is not a bandwidth letter"),
            ("16K0-F3E", "only letters and digits"),
            ("", "0 characters"),
        ];
        for (text, want) in cases {
            let e = parse_designator(text).unwrap_err();
            assert!(e.to_string().contains(want), "{text}: {e}");
        }
        assert_eq!(
            parse_designator("16KF3E").unwrap_err().to_string(),
            "`16KF3E` is not an emission designator (6 characters; a designator has 4 \
             (bandwidth), 7 or 9); expected the necessary bandwidth and the class, such as \
             16K0F3E or 11K2F3E (ITU Radio Regulations, Appendix 1)"
        );
    }

    #[test]
    fn names_round_trip_and_kind_defaults() {
        for c in ModulationClass::ALL {
            assert_eq!(ModulationClass::from_name(c.name()), Some(c));
        }
        assert_eq!(
            ModulationClass::from_name("FM Voice"),
            Some(ModulationClass::FmVoice)
        );
        assert_eq!(ModulationClass::from_name("fm"), None);
        let width = |k: &str| default_bandwidth_for_kind(k).map(|d| d.0);
        assert_eq!(width("FM Broadcast"), Some(Hz(180_000)));
        assert_eq!(width("fm"), Some(Hz(180_000)));
        assert_eq!(width("fm voice repeater"), Some(Hz(16_000)));
        assert_eq!(width("Land Mobile"), Some(Hz(16_000)));
        assert_eq!(width("am"), Some(Hz(10_000)));
        assert_eq!(width("DMR repeater"), Some(Hz(7_600)));
        assert_eq!(width("beacon"), Some(Hz::ZERO));
        assert_eq!(width("microwave link"), None);
    }
}
