//! Naive times (no UTC offset), as many monitors export them, read as wall
//! clock times in a named zone. Two hours a year need a rule:
//!
//! - the hour skipped when the clocks go forward has no wall-clock times, so
//!   a row in it is refused (the export is then most likely in standard time
//!   all year, and only the user can say so);
//! - the hour repeated when the clocks go back is read in file order: a
//!   repeated time is taken in summer time the first time round and in
//!   winter time once the rows have passed it (the earlier instant unless
//!   that would go back before the row before).

use jiff::civil::DateTime;
use jiff::tz::{AmbiguousOffset, Offset, TimeZone};
use jiff::Timestamp;

/// Wall-clock times of one zone turned into instants, in file order.
pub struct WallClock {
    zone: TimeZone,
    name: String,
    /// The instant of the row before, ms since 1970 UTC.
    last_ms: Option<i64>,
    /// Rows read.
    rows: u64,
    /// Rows that fell in a repeated hour.
    repeated: u64,
    /// Of those, rows read at the later offset (the second pass).
    second_pass: u64,
}

/// What [`WallClock`] did, for the report.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct WallClockUse {
    /// The zone's IANA name.
    pub zone: String,
    /// Rows read on the wall clock.
    pub rows: u64,
    /// Rows whose time fell in an hour repeated when the clocks went back.
    pub repeated: u64,
    /// Of those, the rows read as the second pass (winter time).
    pub second_pass: u64,
}

impl WallClock {
    /// A wall clock in the IANA zone `name`; None for an unknown zone.
    pub fn new(name: &str) -> Option<WallClock> {
        Some(WallClock {
            zone: TimeZone::get(name).ok()?,
            name: name.to_string(),
            last_ms: None,
            rows: 0,
            repeated: 0,
            second_pass: 0,
        })
    }

    /// The instant of wall-clock time `dt`, ms since 1970 UTC; Err with
    /// the reason when the time does not exist in the zone (the reason alone,
    /// a `String` on purpose: the table reader places it at its row).
    pub fn instant(&mut self, dt: DateTime) -> Result<i64, String> {
        let at = |o: Offset| o.to_timestamp(dt).map(|t| t.as_millisecond());
        let ms = match self.zone.to_ambiguous_timestamp(dt).offset() {
            AmbiguousOffset::Unambiguous { offset } => at(offset),
            AmbiguousOffset::Gap { .. } => {
                return Err(format!(
                    "{dt} does not exist in {}: the clocks skipped that hour (summer time began)",
                    self.name
                ))
            }
            AmbiguousOffset::Fold { before, after } => {
                self.repeated += 1;
                let first = at(before);
                match (&first, self.last_ms) {
                    (Ok(f), Some(last)) if *f <= last => {
                        self.second_pass += 1;
                        at(after)
                    }
                    _ => first,
                }
            }
        }
        .map_err(|e| format!("{dt} is out of range in {}: {e}", self.name))?;
        self.last_ms = Some(ms);
        self.rows += 1;
        Ok(ms)
    }

    /// The instant of a naive time stored as if it were UTC (a Parquet
    /// timestamp without a zone), ms since 1970 UTC; Err with the reason, as
    /// for [`WallClock::instant`].
    pub fn instant_of_naive_ms(&mut self, wall_ms: i64) -> Result<i64, String> {
        let t = Timestamp::from_millisecond(wall_ms)
            .map_err(|e| format!("{wall_ms} ms is out of range: {e}"))?;
        self.instant(Offset::UTC.to_datetime(t))
    }

    /// What it did so far.
    pub fn used(&self) -> WallClockUse {
        WallClockUse {
            zone: self.name.clone(),
            rows: self.rows,
            repeated: self.repeated,
            second_pass: self.second_pass,
        }
    }
}

impl WallClockUse {
    /// One sentence for a report: which zone, and how the repeated hour was read.
    pub fn note(&self) -> String {
        let mut s = format!(
            "the times have no UTC offset: they were read as wall-clock times in {} (the declared time zone); a row in the hour skipped when summer time begins would have been refused",
            self.zone
        );
        if self.repeated > 0 {
            s += &format!(
                "; {} rows fell in the hour repeated when summer time ended, read in file order ({} in summer time, then {} in winter time)",
                self.repeated,
                self.repeated - self.second_pass,
                self.second_pass
            );
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dt(s: &str) -> DateTime {
        s.parse().unwrap()
    }

    fn utc(s: &str) -> i64 {
        s.parse::<Timestamp>().unwrap().as_millisecond()
    }

    /// US rules (Energy Policy Act of 2005, 15 U.S.C. 260a): summer time
    /// from the second Sunday of March at 02:00 to the first Sunday of
    /// November at 02:00; Chicago is UTC-6 in winter, UTC-5 in summer.
    #[test]
    fn chicago_wall_clock_follows_the_us_changes() {
        let mut c = WallClock::new("America/Chicago").unwrap();
        assert_eq!(
            c.instant(dt("2027-01-04T18:00")),
            Ok(utc("2027-01-05T00:00Z"))
        );
        assert_eq!(
            c.instant(dt("2027-07-04T18:00")),
            Ok(utc("2027-07-04T23:00Z"))
        );
        // 2027-03-14 is the second Sunday of March: 02:30 never happened.
        let e = c.instant(dt("2027-03-14T02:30")).unwrap_err();
        assert!(e.contains("skipped"), "{e}");
    }

    /// 2027-11-07 is the first Sunday of November: 01:00–01:59 happens
    /// twice, first at UTC-5, then at UTC-6. Rows in file order get the
    /// first pass, then the second.
    #[test]
    fn the_repeated_hour_is_read_in_file_order() {
        let mut c = WallClock::new("America/Chicago").unwrap();
        let rows = ["00:30", "01:00", "01:30", "01:00", "01:30", "02:00"];
        let got: Vec<i64> = rows
            .iter()
            .map(|r| c.instant(dt(&format!("2027-11-07T{r}"))).unwrap())
            .collect();
        let want: Vec<i64> = ["05:30", "06:00", "06:30", "07:00", "07:30", "08:00"]
            .iter()
            .map(|u| utc(&format!("2027-11-07T{u}Z")))
            .collect();
        assert_eq!(got, want);
        let used = c.used();
        assert_eq!((used.repeated, used.second_pass), (4, 2));
        assert!(used
            .note()
            .contains("2 in summer time, then 2 in winter time"));
    }

    #[test]
    fn a_naive_parquet_time_is_its_wall_clock_reading() {
        let mut c = WallClock::new("Europe/Berlin").unwrap();
        // 12:00 wall clock in Berlin in January is 11:00 UTC (UTC+1).
        let wall = utc("2027-01-04T12:00Z");
        assert_eq!(c.instant_of_naive_ms(wall), Ok(utc("2027-01-04T11:00Z")));
        assert!(WallClock::new("Mars/Olympus").is_none());
    }
}
