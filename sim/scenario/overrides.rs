//! Command-line overrides of a loaded scenario (`--seed`, `--length`,
//! `--waveform`, `--waveform-rate`), checked by the same rules as the
//! scenario's own keys.

use super::{decode, Error, Scenario};
use crate::units::{parse_quantity, QuantityKind};

/// `30d`, `"12 h"` or `90s`: a duration with its unit, in seconds. The
/// error is what is wrong with the text alone (`Result<_, String>` on
/// purpose): the caller names the option it came from.
pub fn duration_arg(text: &str) -> Result<f64, String> {
    let (num, unit) = split_unit(text);
    // On the command line `10m` means ten minutes, as in most tools.
    let unit = if unit == "m" { "min" } else { unit };
    parse_quantity(&format!("{num} {unit}"), QuantityKind::Duration)
}

/// `12.8kHz` or `"4 kHz"`: a frequency with its unit, in hertz (the error,
/// as for [`duration_arg`], without the option's name).
fn frequency_arg(text: &str) -> Result<f64, String> {
    let (num, unit) = split_unit(text);
    parse_quantity(&format!("{num} {unit}"), QuantityKind::Frequency)
}

/// The number and the unit of `12h` or `"12 h"`.
fn split_unit(text: &str) -> (&str, &str) {
    match text.find(|c: char| c.is_ascii_alphabetic()) {
        Some(i) => (text[..i].trim(), text[i..].trim()),
        None => (text.trim(), ""),
    }
}

/// `--length 30d` or `--length "12 h"`: a positive whole number of
/// reporting intervals.
pub fn set_length(s: &mut Scenario, text: &str) -> Result<(), Error> {
    let bad = |m: String| {
        let help =
            "write a duration such as 7d, 30d or \"12 h\" that the reporting interval divides";
        Error::option(&format!("--length {text}"), m, help)
    };
    let len = duration_arg(text).map_err(bad)?;
    if len <= 0.0 {
        return Err(bad("the length must be greater than zero".into()));
    }
    let per = s.meter.interval_s;
    if ((len / per).round() - len / per).abs() > 1e-6 {
        return Err(bad(format!(
            "{text} is not a whole number of reporting intervals ({per} s)"
        )));
    }
    s.run.length_s = len;
    Ok(())
}

/// `--start 2027-03-01T00:00`: the run's start as a local time in the
/// home's zone (no offset; not inside a clock change). The scenario's own
/// waveform windows must still fall inside the run.
pub fn set_start(s: &mut Scenario, text: &str) -> Result<(), Error> {
    start_at(s, text.trim()).map_err(|m| {
        let help = "write a local date-time such as 2027-03-01T00:00, outside any clock change";
        Error::option(&format!("--start {text}"), m, help)
    })
}

/// [`set_start`], its error without the option's name.
fn start_at(s: &mut Scenario, text: &str) -> Result<(), String> {
    if decode::has_offset(text) {
        return Err(format!(
            "\"{text}\" carries a UTC offset; the start is a local time in the home's time zone ({})",
            s.home.timezone
        ));
    }
    let civil: jiff::civil::DateTime = text
        .parse()
        .map_err(|e| format!("\"{text}\" is not a local date-time ({e})"))?;
    let tz = jiff::tz::TimeZone::get(&s.home.timezone).map_err(|e| e.to_string())?;
    let zoned = match tz.to_ambiguous_zoned(civil).offset() {
        jiff::tz::AmbiguousOffset::Unambiguous { .. } => civil
            .to_zoned(tz)
            .map_err(|e| format!("cannot place {civil}: {e}"))?,
        _ => {
            return Err(format!(
                "the local time {civil} in {} falls in a clock change (skipped or repeated)",
                s.home.timezone
            ))
        }
    };
    s.run.start_local = text.to_string();
    s.run.start_utc_ms = zoned.timestamp().as_millisecond();
    let windows = std::mem::take(&mut s.waveforms.windows);
    for w in windows {
        let placed = decode::place_window(&w.start_local, w.length_s, &s.run, &s.home)?;
        s.waveforms.windows.push(placed);
    }
    Ok(())
}

/// `--waveform START/LENGTH` and `--waveform-rate`; also re-checks the
/// scenario's own windows against a changed run length.
pub fn add_waveforms(
    s: &mut Scenario,
    windows: &[String],
    rate: Option<&str>,
) -> Result<(), Error> {
    let help = format!(
        "give --waveform START/LENGTH inside the run, e.g. {}/10s, and a rate such as 12.8kHz",
        s.run.start_local
    );
    let bad = |given: String| {
        let help = help.clone();
        move |m: String| Error::option(&given, m, help.clone())
    };
    if let Some(r) = rate {
        let hz = frequency_arg(r).map_err(bad(format!("--waveform-rate {r}")))?;
        decode::check_wave_rate(hz, &s.run, &s.home)
            .map_err(bad(format!("--waveform-rate {r}")))?;
        s.waveforms.rate_hz = hz;
    }
    for w in &s.waveforms.windows {
        if w.offset_s + w.length_s > s.run.length_s + 1e-9 {
            return Err(Error::option(
                "--length",
                format!(
                    "the scenario's waveform window {} + {} s lies outside the run of {} s",
                    w.start_local, w.length_s, s.run.length_s
                ),
                "give a --length that holds the scenario's waveform windows",
            ));
        }
    }
    for text in windows {
        let bad = bad(format!("--waveform {text}"));
        let (start, len) = text
            .split_once('/')
            .ok_or_else(|| bad("expected START/LENGTH".into()))?;
        let len_s = duration_arg(len).map_err(&bad)?;
        let w = decode::place_window(start, len_s, &s.run, &s.home).map_err(&bad)?;
        s.waveforms.windows.push(w);
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn durations_read_minutes_as_m() {
        assert_eq!(duration_arg("10m"), Ok(600.0));
        assert_eq!(duration_arg("12 h"), Ok(43_200.0));
        assert_eq!(duration_arg("2d"), Ok(172_800.0));
        assert!(duration_arg("soon").is_err());
    }
}
