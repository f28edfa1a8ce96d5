//! Streaming writer of uncompressed `.vtu` files: the XML skeleton of an unstructured grid
//! with every data array written as inline base64 of a little-endian `UInt64` byte count
//! followed by the raw little-endian values, encoded as one stream (the layout vtkio writes and
//! reads, and VTK and meshio read).
//!
//! Takes the same mesh and fields as [`super::vtu::write_vtu`] and writes straight into the
//! output, without building an in-memory model or copying arrays: measured 4–6× faster than
//! the vtkio model path for 1M-unknown solutions (docs/performance.md).

use std::io::Write;

use super::vtu::{CellField, PointField, xml_escape};
use crate::mesh::Mesh;

/// VTK cell type of the six-node triangle.
const QUADRATIC_TRIANGLE: u8 = 22;
/// VTK cell type of the three-node edge.
const QUADRATIC_EDGE: u8 = 21;

const ALPHABET: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";

/// Base64 (RFC 4648, with padding) of a byte stream fed in pieces.
struct Base64<'a> {
    out: &'a mut dyn Write,
    /// Bytes not yet encoded (fewer than [`STAGE`] plus one push).
    staged: Vec<u8>,
    encoded: Vec<u8>,
}

/// Bytes encoded per batch (a multiple of 3).
const STAGE: usize = 3 << 14;

impl<'a> Base64<'a> {
    fn new(out: &'a mut dyn Write) -> Self {
        Base64 { out, staged: Vec::with_capacity(STAGE + 16), encoded: Vec::with_capacity(STAGE) }
    }

    fn push(&mut self, bytes: &[u8]) -> std::io::Result<()> {
        self.staged.extend_from_slice(bytes);
        if self.staged.len() >= STAGE {
            let whole = self.staged.len() / 3 * 3;
            self.encode(whole);
            self.out.write_all(&self.encoded)?;
            self.staged.drain(..whole);
        }
        Ok(())
    }

    /// Encodes the first `len` staged bytes into `encoded` (replacing it), padding a final
    /// partial group.
    fn encode(&mut self, len: usize) {
        self.encoded.clear();
        for group in self.staged[..len].chunks(3) {
            let byte = |k: usize| u32::from(group.get(k).copied().unwrap_or(0));
            let n = (byte(0) << 16) | (byte(1) << 8) | byte(2);
            let chars = [18, 12, 6, 0].map(|s| ALPHABET[((n >> s) & 63) as usize]);
            self.encoded.extend_from_slice(&chars[..group.len() + 1]);
            self.encoded.extend(std::iter::repeat_n(b'=', 3 - group.len()));
        }
    }

    fn finish(mut self) -> std::io::Result<()> {
        self.encode(self.staged.len());
        self.out.write_all(&self.encoded)
    }
}

/// One `<DataArray>` of `n_bytes` bytes produced by `fill`, which pushes the values.
fn data_array(
    out: &mut dyn Write,
    attributes: &str,
    n_bytes: usize,
    fill: impl FnOnce(&mut Base64) -> std::io::Result<()>,
) -> std::io::Result<()> {
    write!(out, "<DataArray {attributes} format=\"binary\">")?;
    let mut encoder = Base64::new(out);
    encoder.push(&(n_bytes as u64).to_le_bytes())?;
    fill(&mut encoder)?;
    encoder.finish()?;
    out.write_all(b"</DataArray>\n")
}

fn f64_array<I: Iterator<Item = f64>>(
    out: &mut dyn Write,
    attributes: &str,
    n: usize,
    mut values: I,
) -> std::io::Result<()> {
    data_array(out, attributes, 8 * n, |e| values.try_for_each(|v| e.push(&v.to_le_bytes())))
}

fn i32_array<I: Iterator<Item = i32>>(
    out: &mut dyn Write,
    attributes: &str,
    n: usize,
    mut values: I,
) -> std::io::Result<()> {
    data_array(out, attributes, 4 * n, |e| values.try_for_each(|v| e.push(&v.to_le_bytes())))
}

fn u64_array<I: Iterator<Item = u64>>(
    out: &mut dyn Write,
    attributes: &str,
    n: usize,
    mut values: I,
) -> std::io::Result<()> {
    data_array(out, attributes, 8 * n, |e| values.try_for_each(|v| e.push(&v.to_le_bytes())))
}

/// Writes the grid (field names are XML-escaped here).
/// With `boundary_edges`, the boundary edges follow the triangles as quadratic edges, triangle
/// cell fields are padded (NaN, −1) and a cell array `boundary_part` is added.
pub(super) fn write(
    out: &mut dyn Write,
    mesh: &Mesh,
    point_fields: &[PointField],
    cell_fields: &[CellField],
    boundary_edges: bool,
) -> std::io::Result<()> {
    let n_edges = if boundary_edges { mesh.boundary_edges.len() } else { 0 };
    let (n_points, n_cells) = (mesh.nodes.len(), mesh.n_cells() + n_edges);
    writeln!(
        out,
        "<?xml version=\"1.0\"?>\n<VTKFile type=\"UnstructuredGrid\" version=\"1.0\" \
         byte_order=\"LittleEndian\" header_type=\"UInt64\">\n<UnstructuredGrid>\n\
         <Piece NumberOfPoints=\"{n_points}\" NumberOfCells=\"{n_cells}\">"
    )?;
    out.write_all(b"<PointData>\n")?;
    for field in point_fields {
        point_array(out, field, n_points)?;
    }
    out.write_all(b"</PointData>\n<CellData>\n")?;
    for field in cell_fields {
        cell_array(out, field, n_edges, n_cells)?;
    }
    if boundary_edges {
        let parts = mesh.boundary_edges.iter().map(|e| e.part as i32);
        let values = std::iter::repeat_n(-1, mesh.n_cells()).chain(parts);
        i32_array(out, "type=\"Int32\" Name=\"boundary_part\"", n_cells, values)?;
    }
    out.write_all(b"</CellData>\n<Points>\n")?;
    let xyz = mesh.nodes.iter().flat_map(|p| [p[0], p[1], 0.0]);
    f64_array(out, "type=\"Float64\" Name=\"Points\" NumberOfComponents=\"3\"", 3 * n_points, xyz)?;
    out.write_all(b"</Points>\n<Cells>\n")?;
    write_cells(out, mesh, n_edges)?;
    out.write_all(b"</Cells>\n</Piece>\n</UnstructuredGrid>\n</VTKFile>\n")
}

fn point_array(out: &mut dyn Write, field: &PointField, n: usize) -> std::io::Result<()> {
    match *field {
        PointField::Scalar(name, v) => {
            let name = xml_escape(name);
            f64_array(out, &format!("type=\"Float64\" Name=\"{name}\""), n, v.iter().copied())
        }
        PointField::Integer(name, v) => {
            let name = xml_escape(name);
            i32_array(out, &format!("type=\"Int32\" Name=\"{name}\""), n, v.iter().copied())
        }
        PointField::Vector(name, v) => f64_array(
            out,
            &format!("type=\"Float64\" Name=\"{}\" NumberOfComponents=\"3\"", xml_escape(name)),
            3 * n,
            v.iter().flat_map(|a| [a[0], a[1], 0.0]),
        ),
    }
}

fn cell_array(
    out: &mut dyn Write,
    field: &CellField,
    n_padding: usize,
    n: usize,
) -> std::io::Result<()> {
    match *field {
        CellField::Scalar(name, v) => f64_array(
            out,
            &format!("type=\"Float64\" Name=\"{}\"", xml_escape(name)),
            n,
            v.iter().copied().chain(std::iter::repeat_n(f64::NAN, n_padding)),
        ),
        CellField::Integer(name, v) => i32_array(
            out,
            &format!("type=\"Int32\" Name=\"{}\"", xml_escape(name)),
            n,
            v.iter().copied().chain(std::iter::repeat_n(-1, n_padding)),
        ),
    }
}

fn write_cells(out: &mut dyn Write, mesh: &Mesh, n_edges: usize) -> std::io::Result<()> {
    let edges = &mesh.boundary_edges[..n_edges];
    let n_conn = 6 * mesh.n_cells() + 3 * n_edges;
    let connectivity = mesh
        .cells
        .iter()
        .flat_map(|c| c.iter())
        .chain(edges.iter().flat_map(|e| e.nodes.iter()))
        .map(|&n| n as u64);
    u64_array(out, "type=\"UInt64\" Name=\"connectivity\"", n_conn, connectivity)?;
    let n_cells = mesh.n_cells() + n_edges;
    let triangle_ends = (1..=mesh.n_cells()).map(|k| 6 * k as u64);
    let edge_ends = (1..=n_edges).map(|k| (6 * mesh.n_cells() + 3 * k) as u64);
    u64_array(out, "type=\"UInt64\" Name=\"offsets\"", n_cells, triangle_ends.chain(edge_ends))?;
    let types = std::iter::repeat_n(QUADRATIC_TRIANGLE, mesh.n_cells())
        .chain(std::iter::repeat_n(QUADRATIC_EDGE, n_edges));
    data_array(out, "type=\"UInt8\" Name=\"types\"", n_cells, |e| {
        types.into_iter().try_for_each(|t| e.push(&[t]))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn encode(bytes: &[u8]) -> String {
        let mut out = Vec::new();
        let mut e = Base64::new(&mut out);
        // Fed in uneven pieces to exercise the carry between calls.
        for chunk in bytes.chunks(2) {
            e.push(chunk).unwrap();
        }
        e.finish().unwrap();
        String::from_utf8(out).unwrap()
    }

    #[test]
    fn base64_matches_the_rfc_4648_test_vectors() {
        // RFC 4648 §10.
        for (input, expected) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(encode(input.as_bytes()), expected, "input {input:?}");
        }
    }
}
