//! `cornerflow mesh CASE`: mesh a case, print the summary, write `mesh.vtu`.

use std::path::{Path, PathBuf};

use anyhow::Context;
use cornerflow::case::Case;
use cornerflow::mesh::{Mesh, MeshError, MeshStats, cell_quality, generate};
use cornerflow::output::vtu::{
    CellField, PointField, VtuOptions, boundary_part_per_node, write_vtu,
};

use super::args::{MeshArgs, MeshingOptions};
use super::progress::Stage;
use super::{BadInput, load_case};

/// Runs `cornerflow mesh`.
pub fn run(args: &MeshArgs) -> anyhow::Result<()> {
    let case = load_case(&args.case)?;
    let (mesh, stats) = mesh_case(&case, &args.meshing)?;
    print_summary(&case, &stats);
    let out = output_dir(&case, &args.meshing);
    let path = out.join("mesh.vtu");
    write_mesh_vtu(&path, &mesh, case.output.compress)?;
    eprintln!("wrote {}", path.display());
    Ok(())
}

/// Peak memory of a steady solve as a power law `bytes = B · (cells / C)^e` of the triangle
/// count, fitted to measurements with `/usr/bin/time -v` (2026-12-03, release build):
/// Navier–Stokes (sparse LU, the fill grows faster than the unknowns) 1.47 GB at 39,339 and
/// 4.08 GB at 89,120 triangles of the backward-step example, `e = 1.25`; Stokes (`LDLᵀ`)
/// 3.7 GB at 228,156 triangles of the default case (1.02M unknowns; 3.61–3.71 GB over four
/// runs of commit `785d82e`, when the stream function was factorised alongside the flow),
/// `e = 1.05` (the growth of peak memory measured by `benches/scaling.sh` above 250k
/// unknowns). The same case now peaks at 2.29–2.34 GB (the stream function after the flow;
/// the position map, the pattern and the assembled values freed before the factorisation,
/// 2026-12-04); the law is kept for the time-dependent runs that share it, which hold their
/// step matrix throughout, so a steady refusal errs on the side of caution (about 60 % at
/// 1M unknowns).
const MEMORY_LAW_LU: (f64, f64, f64) = (1.47e9, 39_339.0, 1.25);
const MEMORY_LAW_LDLT: (f64, f64, f64) = (3.7e9, 228_156.0, 1.05);

/// Triangles the finest level may have: the inverse of the memory law at 80 % of the memory
/// available now (`MemAvailable` of `/proc/meminfo`, 16 GiB when it cannot be read).
pub fn cell_budget(case: &cornerflow::case::Case) -> usize {
    let (bytes, cells, exponent) = memory_law(case);
    (cells * (0.8 * available_memory() / bytes).powf(1.0 / exponent)) as usize
}

/// The memory law of the case's solver path: sparse LU for steady Navier–Stokes, `LDLᵀ` for
/// Stokes and for every time-dependent run (its step matrix is symmetric).
fn memory_law(case: &cornerflow::case::Case) -> (f64, f64, f64) {
    let lu = case.model.equations == cornerflow::case::Equations::NavierStokes
        && case.model.time.is_none();
    if lu { MEMORY_LAW_LU } else { MEMORY_LAW_LDLT }
}

/// `MemAvailable` of `/proc/meminfo` in bytes (16 GiB when it cannot be read).
fn available_memory() -> f64 {
    let meminfo = std::fs::read_to_string("/proc/meminfo").unwrap_or_default();
    meminfo
        .lines()
        .find_map(|l| l.strip_prefix("MemAvailable:"))
        .and_then(|v| v.trim().trim_end_matches("kB").trim().parse::<f64>().ok())
        .map_or(16.0 * (1u64 << 30) as f64, |kb| kb * 1024.0)
}

/// Refuses (as bad input) a solve whose estimated peak memory — the memory law at the
/// mesher's triangle estimate — exceeds 80 % of the available memory, unless `--force`.
///
/// # Errors
/// [`BadInput`] naming the case file, the estimate and the memory available.
pub fn check_memory(case: &Case, options: &MeshingOptions) -> anyhow::Result<()> {
    let triangles = cornerflow::mesh::estimate_triangles(&case.domain, &case.mesh);
    if options.force || !triangles.is_finite() {
        return Ok(());
    }
    let (bytes, cells, exponent) = memory_law(case);
    let needed = bytes * (triangles / cells).powf(exponent);
    let available = available_memory();
    if needed > 0.8 * available {
        return Err(anyhow::Error::new(BadInput(format!(
            "{}: the mesh (about {triangles:.0} triangles) needs about {:.1} GB for the solve, more than 80 % of the {:.1} GB available; coarsen `mesh.size`, or pass --force",
            case.source.display(),
            needed / 1e9,
            available / 1e9
        ))));
    }
    Ok(())
}

/// Meshes the case, honouring `--force` (which lifts the triangle cap).
pub fn mesh_case(case: &Case, options: &MeshingOptions) -> anyhow::Result<(Mesh, MeshStats)> {
    let mut controls = case.mesh.clone();
    if options.force {
        controls.max_triangles = usize::MAX;
    }
    let stage = Stage::start("mesh", "constrained Delaunay triangulation and six-node lift");
    let (mesh, stats) = generate(&case.domain, &controls).map_err(|e| mesh_error(case, e))?;
    stage.done(&format!("{} triangles, {} nodes", stats.n_triangles, stats.n_nodes));
    Ok((mesh, stats))
}

/// Classifies mesher errors: input faults (bad controls, geometry, size cap) exit with 2.
fn mesh_error(case: &Case, err: MeshError) -> anyhow::Error {
    let file = case.source.display();
    match err {
        MeshError::TooManyTriangles { estimate, cap } => anyhow::Error::new(BadInput(format!(
            "{file}: `mesh`: the sizes would give about {estimate:.0} triangles, more than the cap of {cap} \
             (raise `mesh.max_triangles`, coarsen the sizes, or pass --force)"
        ))),
        e @ (MeshError::InvalidControl { .. }
        | MeshError::InvalidLoop { .. }
        | MeshError::Intersection { .. }
        | MeshError::HoleOutside { .. }) => anyhow::Error::new(BadInput(format!("{file}: {e}"))),
        e => anyhow::Error::new(e).context(format!("meshing {file} failed")),
    }
}

/// The output folder: `-o DIR` or the case's `output.directory`.
pub fn output_dir(case: &Case, options: &MeshingOptions) -> PathBuf {
    options.output.clone().unwrap_or_else(|| case.output.directory.clone())
}

/// Writes the mesh with per-cell quality and boundary-part tags.
pub fn write_mesh_vtu(path: &Path, mesh: &Mesh, compress: bool) -> anyhow::Result<()> {
    let quality = cell_quality(mesh);
    let tags = boundary_part_per_node(mesh);
    write_vtu(
        path,
        mesh,
        &[PointField::Integer("boundary_part", &tags)],
        &[CellField::Scalar("quality_min_angle_deg", &quality)],
        VtuOptions { compress, boundary_edges: true },
    )
    .with_context(|| format!("writing the mesh to {}", path.display()))
}

/// Prints the mesh summary: counts, angles, areas, edges per part.
pub fn print_summary(case: &Case, stats: &MeshStats) {
    let domain_area = case.domain.area();
    println!("mesh of {}", case.name);
    println!("  vertices            {}", stats.n_vertices);
    println!("  triangles           {}", stats.n_triangles);
    println!("  quadratic nodes     {}", stats.n_nodes);
    println!(
        "  angles (deg)        min {:.2} (all triangles {:.2}), mean {:.2}, max {:.2}",
        stats.min_angle_deg, stats.min_angle_all_deg, stats.mean_angle_deg, stats.max_angle_deg
    );
    println!(
        "  area                mesh {:.12e}, domain {:.12e}, relative difference {:.1e}",
        stats.area,
        domain_area,
        (stats.area - domain_area).abs() / domain_area
    );
    println!("  boundary edges per part:");
    for (id, count) in stats.edges_per_part.iter().enumerate() {
        println!("    {:<18}{count}", case.part_name(id));
    }
}
