//! The answers of `pim slope` in words, tables and JSON: the attenuator test, one
//! emitter's power step, and the power steps of several emitters, whose slopes' ratios
//! give the coefficients and the junction's drive exponent ([`pim_core::slope`]).

use pim_core::freq::Hz;
use pim_core::slope::{
    t_quantile, PowerSteps, PowerVerdict, SlopeAnswer, StepKind, Unsettled, Verdict,
};
use pim_io::readings::LevelStep;
use pim_io::text::{pim_command, shell_word};
use serde::Serialize;

use crate::text_table::{Align, TextTable};

/// Wider ranges of steps are not suggested: the product would sink into the noise floor
/// (attenuator) or the licensee would not agree to the power change (our choice of limit).
const MAX_SUGGESTED_RANGE_DB: f64 = 40.0;

/// What one emitter's slope cannot tell, said beside every single-emitter power step.
pub const SINGLE_EMITTER_CAVEAT: &str = "one emitter's slope is α·|k|, and a junction's drive exponent α may lie anywhere from 0.6 to 1.1 (2 to 3 dB/dB at third order is what is measured; common practice): every |k| that fits is listed, and one is settled only when no other fits. Steps of two or more emitters of the first candidate in one file (emitter,step_db,level_dbm) separate |k| from α.";

/// Who makes a power step, said wherever one is asked for or read (common practice; the
/// licence holder alone may change a licensed transmitter's power).
pub const POWER_STEP_ARRANGEMENT: &str = "every power step is arranged with the emitter's licensee, who makes the change and puts it back; a shutdown likewise, with the transmitter locked out and tagged out while anyone works near its antenna";

/// The carrier the steps were taken on and the emitter file naming its emitters, as a
/// command run where the advice is read would name it: with it, the advice's `pim
/// explain` is a whole command, frequency and file included.
#[derive(Clone, Debug)]
pub struct Carrier {
    /// The frequency heard.
    pub freq: Hz,
    /// The emitter file, as the command names it.
    pub emitters: String,
}

/// `pim explain` of the carrier with `flags` added, as a code span; without the carrier,
/// the flags to add to its explain command (no partial command is printed, for none
/// would run as pasted).
fn explain_text(flags: &[String], carrier: Option<&Carrier>) -> String {
    match carrier {
        Some(c) => {
            let mut words = vec![
                "explain".to_string(),
                c.freq.mhz_text(),
                "--emitters".to_string(),
                c.emitters.clone(),
            ];
            words.extend(flags.iter().cloned());
            format!("`{}`", pim_command(&words))
        }
        None => format!(
            "the carrier's explain command with `{}` added (give the carrier with --freq and --emitters to have it whole)",
            flags
                .iter()
                .map(|w| shell_word(w))
                .collect::<Vec<_>>()
                .join(" ")
        ),
    }
}

/// `--coefficient ID=K` as two words, or `None` without the emitter's id.
fn coefficient_flag(emitter: Option<&str>, k: u32) -> Option<Vec<String>> {
    emitter.map(|id| vec!["--coefficient".to_string(), format!("{id}={k}")])
}

fn r4(x: f64) -> f64 {
    (x * 10_000.0).round() / 10_000.0
}

/// What the slope means, as one phrase.
pub fn convention(kind: StepKind) -> &'static str {
    match kind {
        StepKind::Attenuator => "drop of the level per dB of attenuation inserted",
        StepKind::Power => "change of the level per dB of the emitter's power change",
    }
}

fn alternatives(kind: StepKind, boundary: f64) -> String {
    match kind {
        StepKind::Attenuator if boundary < 1.0 => {
            "no response (0) and over the air (1)".to_string()
        }
        StepKind::Attenuator => "over the air (1) and made in the receiver (2 or more)".to_string(),
        StepKind::Power if boundary < 0.6 => "|k| = 0 and |k| = 1".to_string(),
        StepKind::Power if boundary < 1.2 => "|k| = 1 and |k| = 2".to_string(),
        StepKind::Power => format!(
            "|k| = {} and |k| = {}",
            (boundary - 0.5).max(0.0),
            boundary + 0.5
        ),
    }
}

/// How many decision boundaries lie inside the interval (lo, hi).
fn boundaries_crossed(kind: StepKind, lo: f64, hi: f64) -> usize {
    let inside = |b: f64| lo <= b && b <= hi;
    match kind {
        StepKind::Attenuator => [0.5, 1.5].into_iter().filter(|&b| inside(b)).count(),
        // the gaps between |k| ranges at α 0.6 to 1.1: 0.3 | 0.6 and 1.1 | 1.2
        StepKind::Power => [0.45, 1.15].into_iter().filter(|&b| inside(b)).count(),
    }
}

/// What a single series' answer means and what to do or measure next; `emitter` is the
/// id of the emitter stepped, when given, and `carrier` what completes the suggested
/// `pim explain`.
pub fn advice(a: &SlopeAnswer, emitter: Option<&str>, carrier: Option<&Carrier>) -> String {
    let id = emitter.unwrap_or("the emitter");
    let kind = a.kind;
    if let Some(u) = a.unsettled {
        return match u {
            Unsettled::TooFewReadings { .. } => match kind {
                StepKind::Attenuator => "two readings fix a line but not its uncertainty: take three or more, better five, at steps spread over 10 dB or more, each well above the receiver's noise floor.".to_string(),
                StepKind::Power => "two readings fix a line but not its uncertainty: take three or more, better five, at power steps spread over several dB (coordinate every power change with the licensee).".to_string(),
            },
            Unsettled::DoesNotFollow => match kind {
                StepKind::Attenuator => "the level hardly follows the attenuator (under 0.5 dB per dB): check that the attenuator sits in the antenna feed ahead of the receiver, that the readings stay above the receiver's noise floor, and whether the interference enters past the attenuator (the receiver's case, power or audio leads).".to_string(),
                StepKind::Power => "the level rose as the emitter's power was lowered: check the sign of step_db (negative for a reduction) and that every reading is of the same product.".to_string(),
            },
            Unsettled::Alternatives => format!(
                "|k| = {} all fit this slope with a drive exponent of 0.6 to 1.1, and more readings of this emitter alone cannot tell them apart: keep every candidate in which {id} carries one of them, and step a second emitter of the first candidate in the same file (every power change arranged with its licensee).",
                a.consistent_k.iter().map(|k| k.to_string()).collect::<Vec<_>>().join(" or ")
            ),
            Unsettled::TooSteep => "the level changes by more than 15.5 dB per dB of this emitter, steeper than any product the search considers: check the readings and that step_db is in dB.".to_string(),
            Unsettled::Straddles { boundary, readings_needed, step_range_needed_db } => {
                let crossed = a.interval.map_or(0, |(lo, hi)| boundaries_crossed(kind, lo, hi));
                let mut s = if crossed > 1 {
                    format!(
                        "the 95 % interval crosses {crossed} decision boundaries; the nearest to the slope is {boundary} dB per dB, between {}",
                        alternatives(kind, boundary)
                    )
                } else {
                    format!(
                        "the 95 % interval crosses {boundary} dB per dB, the boundary between {}",
                        alternatives(kind, boundary)
                    )
                };
                let range = step_range_needed_db.filter(|&r| r <= MAX_SUGGESTED_RANGE_DB);
                match (readings_needed, range) {
                    (None, None) if step_range_needed_db.is_none() => s.push_str(": the slope sits on the boundary. Check that the readings stay above the noise floor (readings near it flatten the slope) and that the meter reads true in dB; measured junctions often rise less steeply than the ideal law (common practice)."),
                    (None, None) => s.push_str(&format!(
                        ": the scatter ({:.2} dB) is too large for more readings of the same kind to settle it. Steady each reading (average several sweeps, read the level on a spectrum analyser rather than an S-meter) and repeat the series.",
                        a.fit.residual_sd_db.unwrap_or(0.0)
                    )),
                    (n, r) => {
                        let mut ways = Vec::new();
                        if let Some(n) = n {
                            ways.push(format!("take about {n} readings over the same range of steps"));
                        }
                        if let Some(r) = r {
                            ways.push(format!(
                                "spread {} readings over about {:.0} dB of steps",
                                a.fit.n, r.ceil()
                            ));
                        }
                        s.push_str(&format!(
                            ": at the present scatter ({:.2} dB), {}",
                            a.fit.residual_sd_db.unwrap_or(0.0),
                            ways.join(", or ")
                        ));
                        s.push_str(match kind {
                            StepKind::Attenuator => ", keeping every reading well above the noise floor.",
                            StepKind::Power => " (coordinate every power change with the licensee).",
                        });
                    }
                }
                s
            }
        };
    }
    match (kind, a.verdict, a.order, a.coefficient) {
        (StepKind::Attenuator, Some(Verdict::External), _, _) => "the product arrives over the air: the junction is outside the receiver. Find it with bearings, and narrow the candidates with power steps.".to_string(),
        (StepKind::Attenuator, Some(Verdict::Internal), order, _) => format!(
            "the product is made in the receiver{}: its front end overloads. Filter the receiver input (a band-pass cavity, or a notch on the strongest emitter); there is no junction to find.",
            order.map(|n| format!(" by a process of order {n}")).unwrap_or_default()
        ),
        (StepKind::Power, _, _, Some(k)) => {
            let keep = match coefficient_flag(emitter, k) {
                Some(flags) => explain_text(&flags, carrier),
                None => "--coefficient with the stepped emitter's id (give it with --emitter)".to_string(),
            };
            if k == 0 {
                format!("the level does not follow this emitter: it takes no part in the product ({keep} keeps only the candidates without it).")
            } else {
                format!("the emitter carries |k| = {k} in the product, the only coefficient that fits with a drive exponent of 0.6 to 1.1: {keep} keeps only the candidates in which it does.")
            }
        }
        _ => String::new(),
    }
}

fn verdict_word(v: Verdict) -> &'static str {
    match v {
        Verdict::External => "external",
        Verdict::Internal => "internal",
        Verdict::Inconclusive => "inconclusive",
    }
}

/// The JSON answer of one series: the slope, its standard error and the number of
/// readings, then the verdict (attenuator) or the coefficient (power step), which are
/// the contract.
#[derive(Serialize)]
struct SlopeJson<'a> {
    slope_db_per_db: f64,
    slope_stderr: Option<f64>,
    n: usize,
    #[serde(skip_serializing_if = "Option::is_none")]
    verdict: Option<Verdict>,
    #[serde(skip_serializing_if = "Option::is_none")]
    order: Option<Option<u32>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    coefficient: Option<Option<u32>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    consistent_k: Option<&'a [u32]>,
    #[serde(skip_serializing_if = "Option::is_none")]
    emitter: Option<Option<&'a str>>,
    interval_95: Option<[f64; 2]>,
    kind: StepKind,
    convention: &'static str,
    intercept_dbm: f64,
    residual_sd_db: Option<f64>,
    readings_file: &'a str,
    advice: &'a str,
    #[serde(skip_serializing_if = "Option::is_none")]
    caveat: Option<&'static str>,
    #[serde(skip_serializing_if = "Option::is_none")]
    arrangement: Option<&'static str>,
}

/// One series' answer as JSON.
pub fn single_json(
    answer: &SlopeAnswer,
    emitter: Option<&str>,
    source: &str,
    carrier: Option<&Carrier>,
) -> serde_json::Result<String> {
    let attenuator = answer.kind == StepKind::Attenuator;
    let advice = advice(answer, emitter, carrier);
    let v = SlopeJson {
        slope_db_per_db: r4(answer.slope_db_per_db),
        slope_stderr: answer.fit.slope_stderr.map(r4),
        n: answer.fit.n,
        verdict: attenuator.then(|| answer.verdict.unwrap_or(Verdict::Inconclusive)),
        order: attenuator.then_some(answer.order),
        coefficient: (!attenuator).then_some(answer.coefficient),
        consistent_k: (!attenuator).then_some(answer.consistent_k.as_slice()),
        emitter: (!attenuator).then_some(emitter),
        interval_95: answer.interval.map(|(lo, hi)| [r4(lo), r4(hi)]),
        kind: answer.kind,
        convention: convention(answer.kind),
        intercept_dbm: r4(answer.fit.intercept),
        residual_sd_db: answer.fit.residual_sd_db.map(r4),
        readings_file: source,
        advice: &advice,
        caveat: (!attenuator).then_some(SINGLE_EMITTER_CAVEAT),
        arrangement: (!attenuator).then_some(POWER_STEP_ARRANGEMENT),
    };
    pim_io::precision::json_text(&v, true)
}

/// One series' answer as text: the readings against the fitted line, the slope and its
/// interval, the verdict or coefficient, and what next.
pub fn single_text(
    answer: &SlopeAnswer,
    readings: &[LevelStep],
    emitter: Option<&str>,
    source: &str,
    carrier: Option<&Carrier>,
) -> String {
    let kind = answer.kind;
    let title = match kind {
        StepKind::Attenuator => "Attenuator test".to_string(),
        StepKind::Power => match emitter {
            Some(id) => format!("Power-step test of {id}"),
            None => "Power-step test".to_string(),
        },
    };
    let step =
        |f: fn(f64, f64) -> f64, start: f64| readings.iter().map(|r| r.step_db).fold(start, f);
    let mut out = format!(
        "{title}: {} readings from {source}, steps {} to {} dB.\n\n",
        answer.fit.n,
        step(f64::min, f64::INFINITY),
        step(f64::max, f64::NEG_INFINITY),
    );
    let mut t = TextTable::new(&[
        ("line", Align::Right),
        ("step dB", Align::Right),
        ("level dBm", Align::Right),
        ("fitted dBm", Align::Right),
        ("residual dB", Align::Right),
        ("note", Align::Left),
    ]);
    for r in readings {
        let fitted = answer.fit.intercept + answer.fit.slope * r.step_db;
        t.push(vec![
            r.line.to_string(),
            format!("{}", r.step_db),
            format!("{:.1}", r.level_dbm),
            format!("{fitted:.1}"),
            pim_io::precision::signed(r.level_dbm - fitted, 2),
            r.note.clone().unwrap_or_default(),
        ]);
    }
    out.push_str(&t.render());
    out.push('\n');
    out.push_str(&format!(
        "Slope {:.3} dB per dB ({}), standard error {}.\n",
        answer.slope_db_per_db,
        convention(kind),
        answer
            .fit
            .slope_stderr
            .map(|s| format!("{s:.3}"))
            .unwrap_or_else(|| "unknown from two readings".to_string())
    ));
    if let Some((lo, hi)) = answer.interval {
        let df = answer.fit.n - 2;
        out.push_str(&format!(
            "95 % interval {lo:.3} to {hi:.3} (Student's t, {df} degree{} of freedom).\n",
            if df == 1 { "" } else { "s" }
        ));
    }
    match kind {
        StepKind::Attenuator => out.push_str(&format!(
            "Verdict: {}.\n",
            verdict_word(answer.verdict.unwrap_or(Verdict::Inconclusive))
        )),
        StepKind::Power => {
            let fits: Vec<String> = answer.consistent_k.iter().map(|k| k.to_string()).collect();
            out.push_str(&format!(
                "Coefficient: {}.\n",
                match (answer.coefficient, fits.len()) {
                    (Some(k), _) => format!("|k| = {k} (settled: no other fits)"),
                    (None, 0) => "inconclusive".to_string(),
                    (None, _) => format!("|k| = {} fit, not settled", fits.join(" or ")),
                }
            ));
            out.push_str(&format!("Note: {SINGLE_EMITTER_CAVEAT}\n"));
            out.push_str(&format!("Caution: {POWER_STEP_ARRANGEMENT}.\n"));
        }
    }
    out.push_str(&format!("Next: {}\n", advice(answer, emitter, carrier)));
    out
}

/// One series' 95 % interval from its slope, standard error and number of readings.
fn interval(slope: f64, stderr: Option<f64>, n: usize) -> Option<(f64, f64)> {
    let h = stderr? * t_quantile(n as f64 - 2.0)?;
    Some((slope - h, slope + h))
}

/// The coefficient sets that fit, as `(2, 1) or (1, 1)` in the series' order (at most
/// six named).
pub fn alternatives_text(p: &PowerSteps) -> String {
    let ids: Vec<&str> = p.coefficients.iter().map(|c| c.emitter.as_str()).collect();
    let mut sets: Vec<String> = p
        .alternatives
        .iter()
        .take(6)
        .map(|k| {
            let parts: Vec<String> = k.iter().map(|k| k.to_string()).collect();
            format!("({})", parts.join(", "))
        })
        .collect();
    if p.alternatives.len() > 6 {
        sets.push(format!("{} more", p.alternatives.len() - 6));
    }
    format!("|k| of ({}) = {}", ids.join(", "), sets.join(" or "))
}

/// What the power steps of several emitters mean and what to do next; `carrier`
/// completes the suggested `pim explain`.
pub fn power_steps_advice(p: &PowerSteps, carrier: Option<&Carrier>) -> String {
    match p.verdict {
        PowerVerdict::Coefficients => {
            let mut flags: Vec<String> = p
                .coefficients
                .iter()
                .filter_map(|c| coefficient_flag(Some(&c.emitter), c.k?))
                .flatten()
                .collect();
            if let Some(e) = p.exponent {
                flags.push("--drive-exponent".to_string());
                flags.push(format!("{:.2}", e.estimate.clamp(0.1, 1.5)));
            }
            format!(
                "{} keeps only the candidates with these coefficients and levels them with the measured law.",
                explain_text(&flags, carrier)
            )
        }
        PowerVerdict::Ambiguous => format!(
            "{} fit every slope with one drive exponent of 0.6 to 1.1: keep the candidates of every one of them; step each emitter over a wider range, or take more readings, so that the slopes' intervals narrow (every power change arranged with its licensee).",
            alternatives_text(p)
        ),
        PowerVerdict::NoneConsistent => "no set of coefficients up to order 15 with one drive exponent of 0.6 to 1.1 fits every slope: check that every series is of the same product, that step_db is each emitter's own power change in dB, and that the readings stay above the noise floor.".to_string(),
        PowerVerdict::TooFewReadings => "a series has only two readings, which fix a line but not its uncertainty: take three or more, better five, steps of each emitter (every power change arranged with its licensee).".to_string(),
        PowerVerdict::SingleEmitter => SINGLE_EMITTER_CAVEAT.to_string(),
    }
}

#[derive(Serialize)]
struct CoefficientJson<'a> {
    emitter: &'a str,
    k: Option<u32>,
    slope_db_per_db: f64,
    slope_stderr: Option<f64>,
    n: usize,
    interval_95: Option<[f64; 2]>,
}

#[derive(Serialize)]
struct ExponentJson {
    estimate: f64,
    interval_95: [f64; 2],
}

#[derive(Serialize)]
struct PowerStepsJson<'a> {
    kind: StepKind,
    coefficients: Vec<CoefficientJson<'a>>,
    order: Option<u32>,
    exponent: Option<ExponentJson>,
    verdict: PowerVerdict,
    /// Every coefficient set that fits, in the order of `coefficients`.
    alternatives: &'a [Vec<u32>],
    drive_exponent_range: [f64; 2],
    convention: &'static str,
    readings_file: &'a str,
    advice: String,
    arrangement: &'static str,
}

/// The power steps of several emitters as JSON; `counts` gives each series' number of
/// readings, in the order of `p.coefficients`.
pub fn power_steps_json(
    p: &PowerSteps,
    counts: &[usize],
    source: &str,
    carrier: Option<&Carrier>,
) -> serde_json::Result<String> {
    let coefficients = p
        .coefficients
        .iter()
        .zip(counts)
        .map(|(c, &n)| CoefficientJson {
            emitter: &c.emitter,
            k: c.k,
            slope_db_per_db: r4(c.slope_db_per_db),
            slope_stderr: c.slope_stderr.map(r4),
            n,
            interval_95: interval(c.slope_db_per_db, c.slope_stderr, n)
                .map(|(lo, hi)| [r4(lo), r4(hi)]),
        })
        .collect();
    let v = PowerStepsJson {
        kind: StepKind::Power,
        coefficients,
        order: (p.verdict == PowerVerdict::Coefficients)
            .then(|| p.coefficients.iter().filter_map(|c| c.k).sum()),
        exponent: p.exponent.map(|e| ExponentJson {
            estimate: r4(e.estimate),
            interval_95: [r4(e.interval.0), r4(e.interval.1)],
        }),
        verdict: p.verdict,
        alternatives: &p.alternatives,
        drive_exponent_range: [
            pim_core::slope::DRIVE_EXPONENT_RANGE.0,
            pim_core::slope::DRIVE_EXPONENT_RANGE.1,
        ],
        convention: convention(StepKind::Power),
        readings_file: source,
        advice: power_steps_advice(p, carrier),
        arrangement: POWER_STEP_ARRANGEMENT,
    };
    pim_io::precision::json_text(&v, true)
}

/// The power steps of several emitters as text.
pub fn power_steps_text(
    p: &PowerSteps,
    counts: &[usize],
    source: &str,
    carrier: Option<&Carrier>,
) -> String {
    let total: usize = counts.iter().sum();
    let mut out = format!(
        "Power-step test: {total} readings of {} emitters from {source}.\n\n",
        p.coefficients.len()
    );
    let mut t = TextTable::new(&[
        ("emitter", Align::Left),
        ("readings", Align::Right),
        ("slope dB/dB", Align::Right),
        ("std error", Align::Right),
        ("95 % interval", Align::Right),
        ("|k|", Align::Right),
    ]);
    for (c, &n) in p.coefficients.iter().zip(counts) {
        t.push(vec![
            c.emitter.clone(),
            n.to_string(),
            format!("{:.3}", c.slope_db_per_db),
            c.slope_stderr
                .map(|s| format!("{s:.3}"))
                .unwrap_or_else(|| "—".into()),
            interval(c.slope_db_per_db, c.slope_stderr, n)
                .map(|(lo, hi)| format!("{lo:.3} to {hi:.3}"))
                .unwrap_or_else(|| "—".into()),
            c.k.map(|k| k.to_string()).unwrap_or_else(|| "—".into()),
        ]);
    }
    out.push_str(&t.render());
    out.push('\n');
    out.push_str(&format!(
        "Slopes: {} (Student's t for each series).\n",
        convention(StepKind::Power)
    ));
    match p.verdict {
        PowerVerdict::Coefficients => {
            let ks: Vec<String> = p
                .coefficients
                .iter()
                .filter_map(|c| c.k.map(|k| format!("|k| = {k} for {}", c.emitter)))
                .collect();
            let order: u32 = p.coefficients.iter().filter_map(|c| c.k).sum();
            out.push_str(&format!(
                "Coefficients: {} (order {order}), the only set whose one drive exponent, 0.6 to 1.1, fits every slope's 95 % interval.\n",
                ks.join(", ")
            ));
            if let Some(e) = p.exponent {
                out.push_str(&format!(
                    "Drive exponent α = {:.2} (95 % interval {:.2} to {:.2}): the product rises {:.1} dB per dB of all its tones together, the ideal law {order}.\n",
                    e.estimate,
                    e.interval.0,
                    e.interval.1,
                    e.estimate * order as f64
                ));
            }
        }
        PowerVerdict::Ambiguous => out.push_str(&format!(
            "Coefficients: not settled; {} fit.\n",
            alternatives_text(p)
        )),
        PowerVerdict::NoneConsistent => out.push_str("Coefficients: none consistent.\n"),
        PowerVerdict::TooFewReadings => out.push_str("Coefficients: inconclusive.\n"),
        PowerVerdict::SingleEmitter => {}
    }
    out.push_str(&format!("Caution: {POWER_STEP_ARRANGEMENT}.\n"));
    out.push_str(&format!("Next: {}\n", power_steps_advice(p, carrier)));
    out
}
