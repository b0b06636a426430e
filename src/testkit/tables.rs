//! Speed tables as the service reads them: historical CSV
//! (`from_node,to_node,hour_of_week,speed_kmh`), live CSV
//! (`from_node,to_node,speed_kmh,observed_at,samples`) and live
//! observations as JSON values. Fields are written with `Display`, so a
//! caller can also write deliberately bad values (`-3`, `"abc"`) to test
//! rejection.

use std::fmt::{Display, Write};

/// The header line of a historical table.
pub const HISTORICAL_HEADER: &str = "from_node,to_node,hour_of_week,speed_kmh\n";

/// The header line of a live CSV batch.
pub const LIVE_HEADER: &str = "from_node,to_node,speed_kmh,observed_at,samples\n";

/// A historical table being written, header first.
#[derive(Debug, Clone)]
pub struct HistoricalCsv(String);

impl HistoricalCsv {
    pub fn with_header() -> Self {
        Self(HISTORICAL_HEADER.to_string())
    }

    /// Appends one row.
    pub fn row(
        &mut self,
        from: impl Display,
        to: impl Display,
        hour_of_week: impl Display,
        speed_kmh: impl Display,
    ) -> &mut Self {
        let _ = writeln!(self.0, "{from},{to},{hour_of_week},{speed_kmh}");
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

    /// Appends one row.
    pub fn row(
        &mut self,
        from: impl Display,
        to: impl Display,
        speed_kmh: impl Display,
        observed_at: impl Display,
        samples: impl Display,
    ) -> &mut Self {
        let _ = writeln!(self.0, "{from},{to},{speed_kmh},{observed_at},{samples}");
        self
    }

    pub fn into_string(self) -> String {
        self.0
    }
}

/// One live observation as the JSON batch endpoint takes it.
pub fn observation(
    from_node: u64,
    to_node: u64,
    speed_kmh: f64,
    observed_at: &str,
    samples: u32,
) -> serde_json::Value {
    serde_json::json!({
        "from_node": from_node,
        "to_node": to_node,
        "speed_kmh": speed_kmh,
        "observed_at": observed_at,
        "samples": samples,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The service's own CSV reader accepts what these write.
    #[test]
    fn rows_have_the_header_columns() {
        let mut h = HistoricalCsv::with_header();
        h.row(1, 2, 10, 20.5).row(2, 1, 999, -3);
        let text = h.into_string();
        let mut r = csv::Reader::from_reader(text.as_bytes());
        assert_eq!(
            r.headers().unwrap().iter().collect::<Vec<_>>(),
            ["from_node", "to_node", "hour_of_week", "speed_kmh"]
        );
        let rows: Vec<Vec<String>> = r
            .records()
            .map(|x| x.unwrap().iter().map(String::from).collect())
            .collect();
        assert_eq!(rows, [["1", "2", "10", "20.5"], ["2", "1", "999", "-3"]]);
        let mut l = LiveCsv::with_header();
        l.row(1, 2, 15, "2026-03-29T08:00:00Z", 2);
        assert_eq!(
            l.into_string(),
            format!("{LIVE_HEADER}1,2,15,2026-03-29T08:00:00Z,2\n")
        );
        let o = observation(1, 2, 12.0, "2026-03-29T08:00:00Z", 3);
        assert_eq!(o["speed_kmh"], 12.0);
        assert_eq!(o["samples"], 3);
    }
}
