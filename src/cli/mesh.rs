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
