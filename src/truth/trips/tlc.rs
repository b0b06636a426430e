//! The NYC TLC yellow-taxi layout: the 2015–2016 trip records as a
//! [`CsvLayout`] (the mapping is tabled in the [module
//! documentation](super)), read by the CSV reader.

use super::csv::{CsvLayout, DurationColumn, VehicleColumn};

/// Metres in one international mile (exact by definition, 1959).
pub const METRES_PER_MILE: f64 = 1609.344;

impl CsvLayout {
    /// The NYC TLC yellow-taxi trip records of 2015–2016 (see the module
    /// documentation for the mapping).
    pub fn nyc_tlc_yellow() -> Self {
        CsvLayout {
            name: "NYC TLC yellow-taxi CSV",
            id: None,
            from: ("pickup_latitude", "pickup_longitude"),
            to: ("dropoff_latitude", "dropoff_longitude"),
            leaving: "tpep_pickup_datetime",
            duration: DurationColumn::Until("tpep_dropoff_datetime"),
            distance: Some(("trip_distance", METRES_PER_MILE)),
            vehicle: VehicleColumn::Fixed("yellow_taxi"),
            served: None,
            zone: Some(chrono_tz::America::New_York),
        }
    }
}

#[cfg(test)]
mod tests {
    use crate::trips::{read_trips, ReadOptions, TripErrorKind, TripFormat};
    use hodos_engine::geo::LatLon;

    /// The first data row of TLC's yellow_tripdata_2015-01.csv (as in
    /// shared/data/trips): pickup 2015-01-15 19:05:39, dropoff 19:23:42 →
    /// 1,083 s; 1.59 miles → 2,558.857 m; EST (−05:00) in January.
    #[test]
    fn the_tlc_layout_maps_a_real_row() {
        let text = "VendorID,tpep_pickup_datetime,tpep_dropoff_datetime,passenger_count,trip_distance,pickup_longitude,pickup_latitude,RateCodeID,store_and_fwd_flag,dropoff_longitude,dropoff_latitude,payment_type,fare_amount,extra,mta_tax,tip_amount,tolls_amount,improvement_surcharge,total_amount\n\
            2,2015-01-15 19:05:39,2015-01-15 19:23:42,1,1.59,-73.993896484375,40.750110626220703,1,N,-73.974784851074219,40.750617980957031,1,12,1,0.5,3.25,0,0.3,17.05\n\
            2,2015-01-15 19:05:39,2015-01-15 19:05:39,1,1.59,-73.993896484375,40.750110626220703,1,N,-73.974784851074219,40.750617980957031,1,12,1,0.5,3.25,0,0.3,17.05\n\
            2,2015-01-15 19:05:39,2015-01-15 19:23:42,1,1.59,0,0,1,N,-73.974784851074219,40.750617980957031,1,12,1,0.5,3.25,0,0.3,17.05\n";
        let (trips, rep) =
            read_trips(text.as_bytes(), TripFormat::Tlc, &ReadOptions::default()).unwrap();
        assert_eq!(trips.len(), 1);
        let t = &trips[0];
        assert_eq!(t.duration_s, 1083.0);
        assert!((t.distance_m.unwrap() - 2558.85696).abs() < 1e-6);
        assert_eq!(t.from, LatLon::new(40.750_110_626_220_7, -73.993896484375));
        assert_eq!(t.leaving.to_rfc3339(), "2015-01-15T19:05:39-05:00");
        assert_eq!(t.vehicle.as_deref(), Some("yellow_taxi"));
        let kinds: Vec<_> = rep.first_errors.iter().map(|e| (e.line, e.kind)).collect();
        assert_eq!(
            kinds,
            vec![
                (3, TripErrorKind::BadDuration),
                (4, TripErrorKind::UnknownCoordinate)
            ]
        );
    }

    #[test]
    fn a_missing_column_names_the_layout() {
        let e = read_trips(
            "a,b\n1,2\n".as_bytes(),
            TripFormat::Tlc,
            &ReadOptions::default(),
        )
        .unwrap_err();
        assert!(e.to_string().contains("tpep_pickup_datetime"), "{e}");
    }
}
