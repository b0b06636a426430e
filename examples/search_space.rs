//! Prints search-space statistics of the hierarchy on an artifact:
//! `cargo run --release --example search_space -- FILE`.
use hodos::engine::artifact::Artifact;
use hodos::engine::cch::CchQuery;
use hodos::engine::region::Region;

/// The median wall time of five runs of `f`, in milliseconds.
fn median_of_5_ms(mut f: impl FnMut()) -> f64 {
    let mut times: Vec<f64> = (0..5)
        .map(|_| {
            let t = std::time::Instant::now();
            f();
            t.elapsed().as_secs_f64() * 1000.0
        })
        .collect();
    times.sort_by(f64::total_cmp);
    times[2]
}

fn main() {
    let path = std::env::args().nth(1).expect("artifact path");
    let region = Region::from_artifact(Artifact::load(std::path::Path::new(&path)).expect("load"));
    let metric = region.free_flow();
    let ms = median_of_5_ms(|| {
        std::hint::black_box(region.free_flow());
    });
    println!("customization (fresh buffers) median {ms:.1} ms (of 5)");
    let w = hodos::engine::metric::free_flow(&region.graph);
    let mut reuse = metric.customized.clone();
    let ms = median_of_5_ms(|| reuse.customize(&region.cch, &w, &region.graph.edge_len_m));
    println!("customization (in place) median {ms:.1} ms (of 5)");
    let ms =
        median_of_5_ms(|| reuse.customize_with(&region.cch, &w, &region.graph.edge_len_m, false));
    println!("customization (in place, one thread) median {ms:.1} ms (of 5)");
    let cch = &region.cch;
    let n = cch.num_nodes();
    let mut q = CchQuery::new(cch);
    let mut s = 12345u64;
    let mut next = || {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17;
        (s % n as u64) as u32
    };
    let (mut visited, mut arcs_fwd) = (0usize, 0usize);
    let runs = 2000;
    let t = std::time::Instant::now();
    for _ in 0..runs {
        let (a, b) = (next(), next());
        q.node_to_node(cch, &metric.customized, a, b);
        visited += q.last_visited;
        let mut x = cch.rank[a as usize];
        while x != u32::MAX {
            arcs_fwd += metric.customized.forward.range(x).len();
            x = cch.parent[x as usize];
        }
    }
    let el = t.elapsed();
    println!(
        "kept forward arcs {}, backward {}",
        metric.customized.forward.arcs.len(),
        metric.customized.backward.arcs.len()
    );
    println!(
        "nodes {n}, arcs {}, avg visited {:.0}, avg forward chain arcs {:.0}, avg query {:.1} µs",
        cch.num_arcs(),
        visited as f64 / runs as f64,
        arcs_fwd as f64 / runs as f64,
        el.as_secs_f64() * 1e6 / runs as f64
    );
}
