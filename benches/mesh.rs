//! Meshing throughput (triangles per second) on the DFG benchmark channel
//! [0, 2.2] × [0, 0.41] with a 64-gon cylinder (r = 0.05 at (0.2, 0.2)), at about 100k and
//! about 1M triangles. Run with `cargo bench --bench mesh`.

use std::f64::consts::PI;
use std::hint::black_box;

use cornerflow::geometry::{BoundaryLoop, Circle, Domain};
use cornerflow::mesh::{MeshControls, estimate_triangles, generate};
use criterion::{Criterion, Throughput, criterion_group, criterion_main};

fn channel() -> Domain {
    let outer = BoundaryLoop {
        name: "outer".into(),
        points: vec![[0.0, 0.0], [2.2, 0.0], [2.2, 0.41], [0.0, 0.41]],
        edge_parts: vec![0, 2, 0, 1],
        circle: None,
    };
    let c = Circle { center: [0.2, 0.2], radius: 0.05 };
    let points = (0..64)
        .rev()
        .map(|k| {
            let t = 2.0 * PI * k as f64 / 64.0;
            [c.center[0] + c.radius * t.cos(), c.center[1] + c.radius * t.sin()]
        })
        .collect();
    let hole =
        BoundaryLoop { name: "cylinder".into(), points, edge_parts: vec![3; 64], circle: Some(c) };
    let part_names = ["wall", "inflow", "outflow", "cylinder"].map(String::from).to_vec();
    Domain { outer, holes: vec![hole], part_names }
}

/// Uniform size giving about `n` triangles: `N ≈ 1.62 · A / (√3/4 · h²)`.
fn controls_for(domain: &Domain, n: f64) -> MeshControls {
    let size = (1.62 * domain.area() / (0.433 * n)).sqrt();
    MeshControls {
        size,
        part_sizes: vec![],
        grading: vec![],
        min_angle_deg: 30.0,
        max_triangles: 10_000_000,
    }
}

fn bench_mesh(c: &mut Criterion) {
    let domain = channel();
    let mut group = c.benchmark_group("mesh_channel");
    group.sample_size(10);
    for (label, n) in [("100k", 1e5), ("1M", 1e6)] {
        let ctl = controls_for(&domain, n);
        let (mesh, _) = generate(&domain, &ctl).expect("benchmark domain meshes");
        println!(
            "{label}: size {:.3e}, estimate {:.0}, triangles {}",
            ctl.size,
            estimate_triangles(&domain, &ctl),
            mesh.n_cells()
        );
        group.throughput(Throughput::Elements(mesh.n_cells() as u64));
        group.bench_function(label, |b| b.iter(|| generate(black_box(&domain), &ctl)));
    }
    group.finish();
}

criterion_group!(benches, bench_mesh);
criterion_main!(benches);
