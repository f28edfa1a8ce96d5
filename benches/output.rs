//! Writing a solution `.vtu` with `cornerflow::output::vtu::write_vtu`: a structured unit
//! square of six-node triangles with the arrays of a run's `solution.vtu` (velocity,
//! pressure, speed, vorticity, stream function and boundary part per node; divergence error
//! per cell; boundary edges as extra cells), filled with a smooth analytic field (the cost of
//! writing does not depend on a solve). Two groups: `vtu/uncompressed` (the default output)
//! and `vtu/zlib` (`compress = true` in a case's `[output]`). Throughput is in triangles.
//!
//! The file goes to a temporary folder on the build machine's disk and is written atomically
//! (temporary file, flush, sync, rename), as in a run.
//!
//! Run: `cargo bench --bench output`. The default mesh has 100 × 100 cells (20,000
//! triangles, 40,401 nodes); set `CORNERFLOW_BENCH_OUTPUT_CELLS=<cells per side>` to go
//! bigger (e.g. 700 for about 1M triangles).

use std::f64::consts::PI;
use std::hint::black_box;
use std::time::Duration;

use cornerflow::mesh::structured::rectangle;
use cornerflow::output::vtu::{
    CellField, PointField, VtuOptions, boundary_part_per_node, write_vtu,
};
use criterion::{Criterion, Throughput};

fn cells_per_side() -> usize {
    std::env::var("CORNERFLOW_BENCH_OUTPUT_CELLS")
        .ok()
        .and_then(|v| v.parse().ok())
        .filter(|&n: &usize| n >= 2)
        .unwrap_or(100)
}

fn main() {
    let n = cells_per_side();
    let mesh = rectangle([0.0, 0.0], [1.0, 1.0], n, n, |_, _| [0.0, 0.0]).expect("valid mesh");
    // A cellular flow: stream function ψ = sin(πx) sin(πy), u = (∂ψ/∂y, −∂ψ/∂x).
    let psi: Vec<f64> = mesh.nodes.iter().map(|p| (PI * p[0]).sin() * (PI * p[1]).sin()).collect();
    let velocity: Vec<[f64; 2]> = mesh
        .nodes
        .iter()
        .map(|p| {
            let (sx, cx, sy, cy) =
                ((PI * p[0]).sin(), (PI * p[0]).cos(), (PI * p[1]).sin(), (PI * p[1]).cos());
            [PI * sx * cy, -PI * cx * sy]
        })
        .collect();
    let pressure: Vec<f64> = mesh.nodes.iter().map(|p| (2.0 * PI * p[0]).cos()).collect();
    let speed: Vec<f64> = velocity.iter().map(|u| u[0].hypot(u[1])).collect();
    let vorticity: Vec<f64> = psi.iter().map(|s| 2.0 * PI * PI * s).collect();
    let parts = boundary_part_per_node(&mesh);
    let divergence: Vec<f64> = (0..mesh.n_cells()).map(|c| 1e-12 * (c % 7) as f64).collect();
    let points = [
        PointField::Vector("velocity", &velocity),
        PointField::Scalar("pressure", &pressure),
        PointField::Scalar("speed", &speed),
        PointField::Scalar("vorticity", &vorticity),
        PointField::Scalar("stream_function", &psi),
        PointField::Integer("boundary_part", &parts),
    ];
    let cells = [CellField::Scalar("divergence_error", &divergence)];
    let dir = tempfile::tempdir().expect("temporary folder");
    let path = dir.path().join("solution.vtu");

    let mut criterion = Criterion::default().configure_from_args();
    let mut group = criterion.benchmark_group("vtu");
    group.sample_size(10).warm_up_time(Duration::from_secs(1));
    group.throughput(Throughput::Elements(mesh.n_cells() as u64));
    for (name, compress) in [("uncompressed", false), ("zlib", true)] {
        let options = VtuOptions { compress, boundary_edges: true };
        write_vtu(&path, &mesh, &points, &cells, options).expect("vtu written");
        let bytes = std::fs::metadata(&path).map(|m| m.len()).unwrap_or(0);
        println!(
            "vtu {name}: {} triangles, {} nodes, {:.2} MB",
            mesh.n_cells(),
            mesh.nodes.len(),
            bytes as f64 / 1e6
        );
        group.bench_function(name, |b| {
            b.iter(|| write_vtu(black_box(&path), &mesh, &points, &cells, options).expect("vtu"))
        });
    }
    group.finish();
    criterion.final_summary();
}
