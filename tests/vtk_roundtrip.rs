//! Files written by cornerflow read back intact in an independent general-purpose reader
//! (meshio 5.3.5 from PyPI), array by array.

use cornerflow::mesh::structured::rectangle;
use cornerflow::output::vtu::{
    CellField, PointField, VtuOptions, boundary_part_per_node, write_vtu,
};

use crate::util::{floats, read_vtu_with_meshio};

fn sample_mesh() -> cornerflow::mesh::Mesh {
    rectangle([0.0, 0.0], [2.0, 1.0], 5, 3, |i, j| [0.05 * (i as f64 - j as f64), 0.03 * i as f64])
        .unwrap()
}

fn round_trip(compress: bool, boundary_edges: bool) {
    let mesh = sample_mesh();
    let n = mesh.nodes.len();
    let scalar: Vec<f64> = mesh.nodes.iter().map(|p| p[0] * 3.0 - p[1].powi(2) + 1e-17).collect();
    let vector: Vec<[f64; 2]> = mesh.nodes.iter().map(|p| [p[1], -p[0] / 7.0]).collect();
    let tags = boundary_part_per_node(&mesh);
    let quality: Vec<f64> = (0..mesh.n_cells()).map(|c| 1.0 / (c as f64 + 3.0)).collect();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("field.vtu");
    write_vtu(
        &path,
        &mesh,
        &[
            PointField::Scalar("s", &scalar),
            PointField::Vector("velocity", &vector),
            PointField::Integer("tag", &tags),
        ],
        &[CellField::Scalar("quality", &quality)],
        VtuOptions { compress, boundary_edges },
    )
    .unwrap();
    let back = read_vtu_with_meshio(&path);

    let points = back["points"].as_array().unwrap();
    assert_eq!(points.len(), n);
    for (p, q) in mesh.nodes.iter().zip(points) {
        assert_eq!(floats(q), vec![p[0], p[1], 0.0], "points are written exactly (binary f64)");
    }
    let blocks = back["cells"].as_array().unwrap();
    assert_eq!(blocks[0]["type"], "triangle6");
    let cells: Vec<Vec<usize>> = serde_json::from_value(blocks[0]["data"].clone()).unwrap();
    assert_eq!(cells.len(), mesh.n_cells());
    for (c, d) in mesh.cells.iter().zip(&cells) {
        assert_eq!(&c[..], &d[..], "six-node connectivity in VTK order");
    }
    assert_eq!(floats(&back["point_data"]["s"]), scalar);
    let v: Vec<Vec<f64>> = serde_json::from_value(back["point_data"]["velocity"].clone()).unwrap();
    assert!(v.iter().zip(&vector).all(|(a, b)| a == &vec![b[0], b[1], 0.0]));
    let t: Vec<i32> = serde_json::from_value(back["point_data"]["tag"].clone()).unwrap();
    assert_eq!(t, tags);
    assert_eq!(floats(&back["cell_data"]["quality"][0]), quality);
    if boundary_edges {
        assert_eq!(blocks[1]["type"], "line3");
        let edges: Vec<Vec<usize>> = serde_json::from_value(blocks[1]["data"].clone()).unwrap();
        let parts: Vec<i32> =
            serde_json::from_value(back["cell_data"]["boundary_part"][1].clone()).unwrap();
        assert_eq!(edges.len(), mesh.boundary_edges.len());
        for ((e, p), be) in edges.iter().zip(&parts).zip(&mesh.boundary_edges) {
            assert_eq!(&e[..], &be.nodes[..]);
            assert_eq!(*p as usize, be.part);
        }
    } else {
        assert_eq!(blocks.len(), 1);
    }
}

#[test]
fn uncompressed_vtu_round_trips_through_meshio() {
    round_trip(false, false);
}

#[test]
fn zlib_vtu_with_boundary_edges_round_trips_through_meshio() {
    round_trip(true, true);
}

#[test]
fn uncompressed_vtu_with_boundary_edges_round_trips_through_meshio() {
    // The uncompressed path is the streaming writer, the zlib path vtkio's model: both must
    // give the same file contents to a reader.
    round_trip(false, true);
}
