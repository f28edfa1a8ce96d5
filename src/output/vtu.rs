//! VTK XML unstructured-grid files (`.vtu`) of six-node triangles (VTK cell type 22, node
//! order `v0 v1 v2 m01 m12 m20`, the same as [`Mesh`]), optionally with the boundary edges as
//! three-node quadratic edges (VTK cell type 21) carrying their part id.
//!
//! Data are written as inline base64 binary, uncompressed by default (fast and read by every
//! VTK reader; streamed straight to the file by `vtu_stream`) or zlib-compressed on
//! request through vtkio's model; see `stack-notes.md` §4 for why only zlib.

use std::path::Path;

use vtkio::model::{
    Attribute, Attributes, ByteOrder, CellType, Cells, DataArray, DataSet, ElementType, IOBuffer,
    UnstructuredGridPiece, Version, VertexNumbers, Vtk,
};

use super::{OutputError, write_atomic};
use crate::mesh::Mesh;

/// A field given at every mesh node.
#[derive(Clone, Copy, Debug)]
pub enum PointField<'a> {
    Scalar(&'a str, &'a [f64]),
    /// Planar vectors, written with a zero third component.
    Vector(&'a str, &'a [[f64; 2]]),
    Integer(&'a str, &'a [i32]),
}

/// A field given per triangle.
#[derive(Clone, Copy, Debug)]
pub enum CellField<'a> {
    Scalar(&'a str, &'a [f64]),
    Integer(&'a str, &'a [i32]),
}

/// Options of [`write_vtu`].
#[derive(Clone, Copy, Debug, Default)]
pub struct VtuOptions {
    /// Compress the data arrays with zlib (smaller, several times slower to write).
    pub compress: bool,
    /// Append the boundary edges as quadratic-edge cells and add the cell array
    /// `boundary_part` (part id on edges, −1 on triangles). Triangle cell fields are padded
    /// with NaN (scalars) or −1 (integers) on the edge cells.
    pub boundary_edges: bool,
}

/// Writes `mesh` with the given fields to `path` atomically.
///
/// # Errors
/// [`OutputError::FieldLength`] when a field's length does not match the mesh,
/// [`OutputError::Vtk`] when encoding fails, [`OutputError::Io`] naming the file.
pub fn write_vtu(
    path: &Path,
    mesh: &Mesh,
    point_fields: &[PointField],
    cell_fields: &[CellField],
    options: VtuOptions,
) -> Result<(), OutputError> {
    check_lengths(path, mesh, point_fields, cell_fields)?;
    if !options.compress {
        let io_err = |source| OutputError::Io { path: path.to_path_buf(), source };
        return write_atomic(path, |w| {
            super::vtu_stream::write(w, mesh, point_fields, cell_fields, options.boundary_edges)
                .map_err(io_err)
        });
    }
    let n_edges = if options.boundary_edges { mesh.boundary_edges.len() } else { 0 };
    let mut cell_attrs: Vec<Attribute> =
        cell_fields.iter().map(|f| cell_attribute(f, n_edges)).collect();
    if options.boundary_edges {
        let mut part = vec![-1i32; mesh.n_cells()];
        part.extend(mesh.boundary_edges.iter().map(|e| e.part as i32));
        cell_attrs.push(scalar_attribute("boundary_part", IOBuffer::I32(part)));
    }
    let piece = UnstructuredGridPiece {
        points: IOBuffer::F64(mesh.nodes.iter().flat_map(|p| [p[0], p[1], 0.0]).collect()),
        cells: cells(mesh, options.boundary_edges),
        data: Attributes {
            point: point_fields.iter().map(point_attribute).collect(),
            cell: cell_attrs,
        },
    };
    let vtk = Vtk {
        version: Version::new(),
        byte_order: ByteOrder::LittleEndian,
        title: String::new(),
        file_path: None,
        data: DataSet::inline(piece),
    };
    encode(path, vtk, options.compress)
}

fn encode(path: &Path, vtk: Vtk, compress: bool) -> Result<(), OutputError> {
    let (compressor, level) = if compress {
        (vtkio::xml::Compressor::ZLib, 6)
    } else {
        (vtkio::xml::Compressor::None, 0)
    };
    let file = vtk.try_into_xml_format(compressor, level).map_err(vtk_error(path))?;
    write_atomic(path, |w| file.write(w).map_err(vtk_error(path)))
}

fn vtk_error<E: std::fmt::Debug>(path: &Path) -> impl Fn(E) -> OutputError + '_ {
    move |e| OutputError::Vtk { path: path.to_path_buf(), reason: format!("{e:?}") }
}

fn cells(mesh: &Mesh, with_edges: bool) -> Cells {
    let n_edges = if with_edges { mesh.boundary_edges.len() } else { 0 };
    let mut connectivity: Vec<u64> = Vec::with_capacity(6 * mesh.n_cells() + 3 * n_edges);
    let mut offsets: Vec<u64> = Vec::with_capacity(mesh.n_cells() + n_edges);
    for cell in &mesh.cells {
        connectivity.extend(cell.iter().map(|&n| n as u64));
        offsets.push(connectivity.len() as u64);
    }
    let mut types = vec![CellType::QuadraticTriangle; mesh.n_cells()];
    if with_edges {
        for edge in &mesh.boundary_edges {
            // VTK quadratic edge: two end points, then the midpoint.
            connectivity.extend(edge.nodes.iter().map(|&n| n as u64));
            offsets.push(connectivity.len() as u64);
        }
        types.extend(std::iter::repeat_n(CellType::QuadraticEdge, n_edges));
    }
    Cells { cell_verts: VertexNumbers::XML { connectivity, offsets }, types }
}

fn scalar_attribute(name: &str, data: IOBuffer) -> Attribute {
    Attribute::DataArray(DataArray {
        name: name.into(),
        elem: ElementType::Scalars { num_comp: 1, lookup_table: None },
        data,
    })
}

fn point_attribute(field: &PointField) -> Attribute {
    match *field {
        PointField::Scalar(name, v) => scalar_attribute(name, IOBuffer::F64(v.to_vec())),
        PointField::Integer(name, v) => scalar_attribute(name, IOBuffer::I32(v.to_vec())),
        PointField::Vector(name, v) => Attribute::DataArray(DataArray {
            name: name.into(),
            elem: ElementType::Vectors,
            data: IOBuffer::F64(v.iter().flat_map(|a| [a[0], a[1], 0.0]).collect()),
        }),
    }
}

fn cell_attribute(field: &CellField, n_padding: usize) -> Attribute {
    match *field {
        CellField::Scalar(name, v) => {
            let mut data = v.to_vec();
            data.extend(std::iter::repeat_n(f64::NAN, n_padding));
            scalar_attribute(name, IOBuffer::F64(data))
        }
        CellField::Integer(name, v) => {
            let mut data = v.to_vec();
            data.extend(std::iter::repeat_n(-1, n_padding));
            scalar_attribute(name, IOBuffer::I32(data))
        }
    }
}

fn check_lengths(
    path: &Path,
    mesh: &Mesh,
    point_fields: &[PointField],
    cell_fields: &[CellField],
) -> Result<(), OutputError> {
    let mismatch = |name: &str, got: usize, expected: usize| OutputError::FieldLength {
        path: path.to_path_buf(),
        name: name.to_string(),
        got,
        expected,
    };
    for f in point_fields {
        let (name, len) = match f {
            PointField::Scalar(n, v) => (n, v.len()),
            PointField::Vector(n, v) => (n, v.len()),
            PointField::Integer(n, v) => (n, v.len()),
        };
        if len != mesh.nodes.len() {
            return Err(mismatch(name, len, mesh.nodes.len()));
        }
    }
    for f in cell_fields {
        let (name, len) = match f {
            CellField::Scalar(n, v) => (n, v.len()),
            CellField::Integer(n, v) => (n, v.len()),
        };
        if len != mesh.n_cells() {
            return Err(mismatch(name, len, mesh.n_cells()));
        }
    }
    Ok(())
}

/// Per-node boundary-part field for viewers: the part id of a boundary node (the smallest id
/// where parts meet at a corner), −1 for interior nodes.
pub fn boundary_part_per_node(mesh: &Mesh) -> Vec<i32> {
    let mut tag = vec![-1i32; mesh.nodes.len()];
    for edge in &mesh.boundary_edges {
        for &n in &edge.nodes {
            let p = edge.part as i32;
            if tag[n] < 0 || p < tag[n] {
                tag[n] = p;
            }
        }
    }
    tag
}

/// Writes a `.pvd` collection that lists `(time, file name)` pairs, so a VTK viewer opens a
/// series of `.vtu` files as one animated dataset. File names are relative to the `.pvd`.
///
/// # Errors
/// [`OutputError::Io`] naming the file.
pub fn write_pvd(path: &Path, entries: &[(f64, String)]) -> Result<(), OutputError> {
    let mut text = String::from(
        "<?xml version=\"1.0\"?>\n<VTKFile type=\"Collection\" version=\"0.1\" byte_order=\"LittleEndian\">\n  <Collection>\n",
    );
    for (time, file) in entries {
        text.push_str(&format!(
            "    <DataSet timestep=\"{time}\" group=\"\" part=\"0\" file=\"{}\"/>\n",
            xml_escape(file)
        ));
    }
    text.push_str("  </Collection>\n</VTKFile>\n");
    super::atomic::write_text_atomic(path, &text)
}

pub(super) fn xml_escape(s: &str) -> String {
    s.replace('&', "&amp;").replace('"', "&quot;").replace('<', "&lt;").replace('>', "&gt;")
}
