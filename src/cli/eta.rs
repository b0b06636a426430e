//! `hodos eta`: one free-flow answer between two coordinates on an
//! artifact, with how far each end snapped.

use hodos::engine::artifact::Artifact;
use hodos::engine::cch::CchQuery;
use hodos::engine::geo::LatLon;
use hodos::engine::region::Region;
use std::path::Path;

pub fn run(file: &Path, from: LatLon, to: LatLon, max_snap_m: f64) -> anyhow::Result<()> {
    let region = Region::from_artifact(Artifact::load(file)?);
    let metric = region.free_flow();
    let mut q = CchQuery::new(&region.cch);
    let eta = region.eta(&metric, &mut q, from, to, max_snap_m)?;
    println!("eta_s        {:.1}", eta.time_s);
    println!("meters       {:.1}", eta.meters);
    println!(
        "from snap    {:.1} m (to {})",
        eta.from.distance_m, eta.from.point
    );
    println!(
        "to snap      {:.1} m (to {})",
        eta.to.distance_m, eta.to.point
    );
    Ok(())
}
