//! Axes shared by the pictures: local-time ticks under a panel, and axis
//! titles that name the quantity and its unit.

use super::palette::{GRID, INK};
use std::fmt::Write as _;

/// A panel's rectangle in picture coordinates (pixels).
#[derive(Clone, Copy)]
pub struct Frame {
    pub x: f64,
    pub y: f64,
    pub w: f64,
    pub h: f64,
}

/// Tick steps in hours; the smallest that keeps the labels at or under the
/// number asked for is used.
const STEPS_H: [i64; 8] = [1, 2, 3, 6, 12, 24, 48, 168];

/// Draws grid lines and labels at whole local hours (or days) over the
/// window `[w0, w1)` (UTC milliseconds) under `f`: "HH:MM", and "MM-DD" at
/// local midnight.
pub fn time_ticks(
    svg: &mut String,
    tz: &jiff::tz::TimeZone,
    (w0, w1): (i64, i64),
    f: Frame,
    max_labels: usize,
) -> Result<(), jiff::Error> {
    let span_h = (w1 - w0) as f64 / 3.6e6;
    let step_h = STEPS_H
        .into_iter()
        .find(|s| span_h / *s as f64 <= max_labels.max(1) as f64)
        .unwrap_or(168);
    let first = jiff::Timestamp::from_millisecond(w0)?.to_zoned(tz.clone());
    let mut tick = first.date().to_zoned(tz.clone())?;
    // Walk whole hours (each an hour of real time, so a daylight-saving
    // change shifts nothing) and label those on the step in local time.
    let (mut days, mut last) = (0i64, None);
    while tick.timestamp().as_millisecond() < w1 {
        let ms = tick.timestamp().as_millisecond();
        let hour = i64::from(tick.hour());
        let on_step = if step_h < 24 {
            hour % step_h == 0
        } else {
            hour == 0 && days % (step_h / 24) == 0
        };
        if hour == 0 && last != Some(tick.datetime()) {
            days += 1;
        }
        if ms >= w0 && on_step && last != Some(tick.datetime()) {
            let px = f.x + (ms - w0) as f64 / (w1 - w0) as f64 * f.w;
            let label = tick.strftime(if hour == 0 { "%m-%d" } else { "%H:%M" });
            let _ = write!(
                svg,
                r#"<line class="tick" x1="{px:.1}" x2="{px:.1}" y1="{:.1}" y2="{:.1}" stroke="{GRID}"/><text class="tick-label" x="{px:.1}" y="{:.1}" text-anchor="middle" font-size="10" fill="{INK}">{label}</text>"#,
                f.y,
                f.y + f.h,
                f.y + f.h + 12.0,
            );
        }
        last = Some(tick.datetime());
        tick = tick.checked_add(jiff::Span::new().hours(1))?;
    }
    Ok(())
}

/// The title of a horizontal axis, centred under `f` (below its tick labels).
pub fn x_title(svg: &mut String, f: Frame, text: &str) {
    let _ = write!(
        svg,
        r#"<text class="axis-title" x="{:.1}" y="{:.1}" text-anchor="middle" font-size="10" fill="{INK}">{}</text>"#,
        f.x + f.w / 2.0,
        f.y + f.h + 25.0,
        super::escape(text)
    );
}

/// The title of a vertical axis, turned upright along the left of `f`.
pub fn y_title(svg: &mut String, f: Frame, text: &str, dx: f64) {
    let (x, y) = (f.x - dx, f.y + f.h / 2.0);
    let _ = write!(
        svg,
        r#"<text class="axis-title" x="{x:.1}" y="{y:.1}" text-anchor="middle" font-size="10" fill="{INK}" transform="rotate(-90 {x:.1} {y:.1})">{}</text>"#,
        super::escape(text)
    );
}
