//! Blending live observations into the historical vector: decay by age,
//! expiry, skew tolerance.

use super::*;

#[test]
fn blend_decays_live_weight_and_ignores_expired() {
    let (_, idx, ff) = setup();
    let cfg = ValidationConfig::default();
    let now = t(NOW);
    let half_life = Duration::from_secs(300);
    let ttl = Duration::from_secs(900);
    let mut live = LiveLayer::new(idx.num_edges());
    let at = |secs_ago: i64| (now - TimeDelta::seconds(secs_ago)).to_rfc3339();
    live.apply(
        &idx,
        &[
            obs(B, C, 10.0, &at(0), 1),   // age 0: weight 1
            obs(C, D, 40.0, &at(300), 1), // one half-life: weight 0.5
            obs(A, B, 5.0, &at(901), 1),  // past the TTL: ignored
            obs(B, A, 20.0, &at(900), 1), // exactly the TTL: still fresh, weight 1/8
        ],
        now,
        &cfg,
    )
    .unwrap();
    let (s, stats) = blend(&ff, &live, now, half_life, ttl).unwrap();
    // Exponential decay (common practice): w = 0.5^(age / half_life).
    // e0, e4: expired → historical 50, 20. e1: w = 0.5^3 = 0.125 →
    // 0.125·20 + 0.875·50 = 46.25. e2: 10. e3: 0.5·40 + 0.5·80 = 60.
    assert_eq!(s, vec![50.0, 46.25, 10.0, 60.0, 20.0]);
    assert_eq!(stats.fresh_edges, 3);
    assert!(stats.any_fresh);
    assert_eq!(stats.newest_age_s, Some(0.0));

    // Reused buffer, later: everything has aged by 901 s → all expired.
    let mut buf = Vec::new();
    let later = now + TimeDelta::seconds(901);
    let stats = blend_into(&ff, &live, later, half_life, ttl, &mut buf).unwrap();
    assert_eq!(buf, ff);
    assert_eq!(stats.fresh_edges, 0);
    assert!(!stats.any_fresh);
    assert_eq!(stats.newest_age_s, Some(901.0));

    // Expire drops what the blend ignores; the newest stays.
    let n = live.len();
    assert_eq!(live.expire(now, ttl), 2); // A→B's two parallel edges
    assert_eq!(live.len(), n - 2);
    assert_eq!(live.get(0), None);
    assert_eq!(live.newest_observed_at(), Some(now));
    let (s2, _) = blend(&ff, &live, now, half_life, ttl).unwrap();
    assert_eq!(s2, s);
}

#[test]
fn blend_without_live_data_is_the_historical_vector() {
    let (_, idx, ff) = setup();
    let live = LiveLayer::new(idx.num_edges());
    let (s, stats) = blend(
        &ff,
        &live,
        t(NOW),
        Duration::from_secs(300),
        Duration::from_secs(900),
    )
    .unwrap();
    assert_eq!(s, ff);
    assert_eq!(
        stats,
        BlendStats {
            fresh_edges: 0,
            newest_age_s: None,
            any_fresh: false
        }
    );
    let e = blend(
        &ff[..4],
        &live,
        t(NOW),
        Duration::from_secs(300),
        Duration::from_secs(900),
    );
    assert!(matches!(e, Err(SpeedsError::LengthMismatch { .. })));
}

#[test]
fn observation_within_skew_counts_as_age_zero() {
    let (_, idx, ff) = setup();
    let mut live = LiveLayer::new(idx.num_edges());
    live.apply(
        &idx,
        &[obs(B, C, 12.0, "2026-03-29T08:06:00Z", 1)],
        t(NOW),
        &ValidationConfig::default(),
    )
    .unwrap();
    let (s, stats) = blend(
        &ff,
        &live,
        t(NOW),
        Duration::from_secs(300),
        Duration::from_secs(900),
    )
    .unwrap();
    assert_eq!(s[2], 12.0);
    assert_eq!(stats.newest_age_s, Some(0.0));
}
