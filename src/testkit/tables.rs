//! Speed tables as the service reads them: historical CSV
//! (`segment,way,tail,head,hour_of_week,kmh`), live CSV
//! (`segment,way,tail,head,kmh,observed_at,samples`) and live observations
//! as JSON values. A row names its segments by id (`segment_row`), by end
//! nodes (`row`, every segment with those ends) or by any mix
//! (`full_row`, empty cells = not given). Fields are written with
//! `Display`, so a caller can also write deliberately bad values (`-3`,
//! `"abc"`) to test rejection.

use std::fmt::{Display, Write};

/// The header line of a historical table.
pub const HISTORICAL_HEADER: &str = "segment,way,tail,head,hour_of_week,kmh\n";

/// The header line of a live CSV batch.
pub const LIVE_HEADER: &str = "segment,way,tail,head,kmh,observed_at,samples\n";

/// A historical table being written, header first.
#[derive(Debug, Clone)]
pub struct HistoricalCsv(String);

impl HistoricalCsv {
    pub fn with_header() -> Self {
        Self(HISTORICAL_HEADER.to_string())
    }

    /// Appends one row naming every segment from node `tail` to node `head`
    /// (external ids).
    pub fn row(
        &mut self,
        tail: impl Display,
        head: impl Display,
        hour_of_week: impl Display,
        kmh: impl Display,
    ) -> &mut Self {
        self.full_row("", "", tail, head, hour_of_week, kmh)
    }

    /// Appends one row naming a segment by its id.
    pub fn segment_row(
        &mut self,
        segment: impl Display,
        hour_of_week: impl Display,
        kmh: impl Display,
    ) -> &mut Self {
        self.full_row(segment, "", "", "", hour_of_week, kmh)
    }

    /// Appends one row with every column; pass `""` for a cell not given.
    pub fn full_row(
        &mut self,
        segment: impl Display,
        way: impl Display,
        tail: impl Display,
        head: impl Display,
        hour_of_week: impl Display,
        kmh: impl Display,
    ) -> &mut Self {
        let _ = writeln!(self.0, "{segment},{way},{tail},{head},{hour_of_week},{kmh}");
        self
    }

    pub fn into_string(self) -> String {
        self.0
    }
}

/// A live CSV batch being written, header first.
#[derive(Debug, Clone)]
pub struct LiveCsv(String);

impl LiveCsv {
    pub fn with_header() -> Self {
        Self(LIVE_HEADER.to_string())
    }

    /// Appends one row naming every segment from node `tail` to node `head`.
    pub fn row(
        &mut self,
        tail: impl Display,
        head: impl Display,
        kmh: impl Display,
        observed_at: impl Display,
        samples: impl Display,
    ) -> &mut Self {
        self.full_row("", "", tail, head, kmh, observed_at, samples)
    }

    /// Appends one row naming a segment by its id.
    pub fn segment_row(
        &mut self,
        segment: impl Display,
        kmh: impl Display,
        observed_at: impl Display,
        samples: impl Display,
    ) -> &mut Self {
        self.full_row(segment, "", "", "", kmh, observed_at, samples)
    }

    /// Appends one row with every column; pass `""` for a cell not given.
    #[allow(clippy::too_many_arguments)]
    pub fn full_row(
        &mut self,
        segment: impl Display,
        way: impl Display,
        tail: impl Display,
        head: impl Display,
        kmh: impl Display,
        observed_at: impl Display,
        samples: impl Display,
    ) -> &mut Self {
        let _ = writeln!(
            self.0,
            "{segment},{way},{tail},{head},{kmh},{observed_at},{samples}"
        );
        self
    }

    pub fn into_string(self) -> String {
        self.0
    }
}

/// One live observation as the JSON batch endpoint takes it, naming every
/// segment from node `tail` to node `head`.
pub fn observation(
    tail: u64,
    head: u64,
    kmh: f64,
    observed_at: &str,
    samples: u32,
) -> serde_json::Value {
    serde_json::json!({
        "tail": tail,
        "head": head,
        "kmh": kmh,
        "observed_at": observed_at,
        "samples": samples,
    })
}

/// One live observation naming a segment by its id.
pub fn segment_observation(
    segment: u64,
    kmh: f64,
    observed_at: &str,
    samples: u32,
) -> serde_json::Value {
    serde_json::json!({
        "segment": segment,
        "kmh": kmh,
        "observed_at": observed_at,
        "samples": samples,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A general CSV reader (the `csv` crate) sees the header's columns and
    /// the cells as written, empty where not given.
    #[test]
    fn rows_have_the_header_columns() {
        let mut h = HistoricalCsv::with_header();
        h.row(1, 2, 10, 20.5)
            .row(2, 1, 999, -3)
            .segment_row(7, 11, 30)
            .full_row(8, 70, 2, 3, 12, 40);
        let text = h.into_string();
        let mut r = csv::Reader::from_reader(text.as_bytes());
        assert_eq!(
            r.headers().unwrap().iter().collect::<Vec<_>>(),
            ["segment", "way", "tail", "head", "hour_of_week", "kmh"]
        );
        let rows: Vec<Vec<String>> = r
            .records()
            .map(|x| x.unwrap().iter().map(String::from).collect())
            .collect();
        assert_eq!(
            rows,
            [
                ["", "", "1", "2", "10", "20.5"],
                ["", "", "2", "1", "999", "-3"],
                ["7", "", "", "", "11", "30"],
                ["8", "70", "2", "3", "12", "40"]
            ]
        );
        let mut l = LiveCsv::with_header();
        l.row(1, 2, 15, "2026-03-29T08:00:00Z", 2)
            .segment_row(9, 16, "2026-03-29T08:00:00Z", 1);
        assert_eq!(
            l.into_string(),
            format!(
                "{LIVE_HEADER},,1,2,15,2026-03-29T08:00:00Z,2\n9,,,,16,2026-03-29T08:00:00Z,1\n"
            )
        );
        let o = observation(1, 2, 12.0, "2026-03-29T08:00:00Z", 3);
        assert_eq!((o["tail"].as_u64(), o["head"].as_u64()), (Some(1), Some(2)));
        assert_eq!(o["kmh"], 12.0);
        assert_eq!(o["samples"], 3);
        let o = segment_observation(4, 12.0, "2026-03-29T08:00:00Z", 3);
        assert_eq!(o["segment"], 4);
        assert!(o.get("tail").is_none());
    }
}
