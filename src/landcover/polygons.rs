//! Polygons from a labelled raster: each 4-connected patch of one label becomes one polygon
//! (an outer ring and its holes) traced along pixel edges, so its area is exactly its
//! pixels' area. Where two pixels of one label touch only at a corner they are separate
//! patches, and their rings touch at that corner without crossing.
//!
//! Rings are in pixel-corner coordinates (column, row), closed (first vertex repeated), with
//! the vertices where the boundary keeps its direction dropped, except that straight runs
//! keep a vertex every [`MAX_RUN`] pixels (so a ring stays close to its pixels' edges once
//! reprojected).

use std::collections::HashMap;

/// Longest straight run between two vertices, in pixels.
pub const MAX_RUN: u32 = 64;

/// One patch as a polygon.
#[derive(Debug, Clone, PartialEq)]
pub struct Patch {
    /// The label of its pixels.
    pub value: u8,
    /// Pixels in the patch.
    pub pixels: u64,
    /// A pixel of the patch (raster index), the first in raster order.
    pub first_pixel: usize,
    /// Rings: the outer ring first, then the holes; each closed.
    pub rings: Vec<Vec<(u32, u32)>>,
}

/// 4-connected patches of equal non-zero values: the patch number (1-based) of each pixel
/// (0 for value 0) and the patch count.
pub fn patch_ids(values: &[u8], w: usize, h: usize) -> (Vec<u32>, u32) {
    let mut id = vec![0u32; values.len()];
    let mut n = 0u32;
    let mut stack = Vec::new();
    for start in 0..values.len() {
        if values[start] == 0 || id[start] != 0 {
            continue;
        }
        n += 1;
        id[start] = n;
        stack.push(start);
        while let Some(p) = stack.pop() {
            let (x, y) = (p % w, p / w);
            let mut visit = |q: usize| {
                if id[q] == 0 && values[q] == values[start] {
                    id[q] = n;
                    stack.push(q);
                }
            };
            if x > 0 {
                visit(p - 1);
            }
            if x + 1 < w {
                visit(p + 1);
            }
            if y > 0 {
                visit(p - w);
            }
            if y + 1 < h {
                visit(p + w);
            }
        }
    }
    (id, n)
}

/// Twice the signed area of a closed ring (shoelace), in pixel units.
fn twice_area(ring: &[(u32, u32)]) -> i64 {
    ring.windows(2)
        .map(|s| s[0].0 as i64 * s[1].1 as i64 - s[1].0 as i64 * s[0].1 as i64)
        .sum()
}

/// Every patch of `values` (`w × h`, 0 = nodata) as a polygon, in patch order (first pixel
/// in raster order).
pub fn vectorise(values: &[u8], w: usize, h: usize) -> Vec<Patch> {
    let (id, n) = patch_ids(values, w, h);
    let mut pixels = vec![0u64; n as usize + 1];
    let mut first = vec![usize::MAX; n as usize + 1];
    for (p, &i) in id.iter().enumerate() {
        if i > 0 {
            pixels[i as usize] += 1;
            first[i as usize] = first[i as usize].min(p);
        }
    }
    // Directed boundary edges, each pixel walked the same way round:
    // top (x+1,y)→(x,y), left (x,y)→(x,y+1), bottom (x,y+1)→(x+1,y+1), right (x+1,y+1)→(x+1,y).
    let mut out_edges: HashMap<(u32, u32, u32), Vec<(u32, u32)>> = HashMap::new();
    let same = |p: usize, q: Option<usize>| q.is_some_and(|q| id[q] == id[p]);
    for (p, &i) in id.iter().enumerate() {
        if i == 0 {
            continue;
        }
        let (x, y) = ((p % w) as u32, (p / w) as u32);
        let up = (y > 0).then(|| p - w);
        let down = ((y as usize) + 1 < h).then(|| p + w);
        let left = (x > 0).then(|| p - 1);
        let right = ((x as usize) + 1 < w).then(|| p + 1);
        let mut add = |a: (u32, u32), b: (u32, u32)| {
            out_edges.entry((i, a.0, a.1)).or_default().push(b);
        };
        if !same(p, up) {
            add((x + 1, y), (x, y));
        }
        if !same(p, left) {
            add((x, y), (x, y + 1));
        }
        if !same(p, down) {
            add((x, y + 1), (x + 1, y + 1));
        }
        if !same(p, right) {
            add((x + 1, y + 1), (x + 1, y));
        }
    }
    // Chain the edges into rings, patch by patch, starting from the patch's first pixel's
    // top-left corner region of the table (deterministic: sorted starts).
    let mut starts: Vec<(u32, u32, u32)> = out_edges.keys().copied().collect();
    starts.sort_unstable_by_key(|&(i, x, y)| (i, y, x));
    let mut rings: Vec<Vec<Vec<(u32, u32)>>> = vec![Vec::new(); n as usize + 1];
    for s in starts {
        while let Some(b) = out_edges.get_mut(&s).and_then(|v| v.pop()) {
            let (i, ax, ay) = s;
            let mut ring = vec![(ax, ay), b];
            let (mut prev, mut cur) = ((ax, ay), b);
            while cur != (ax, ay) {
                let outs = out_edges.get_mut(&(i, cur.0, cur.1)).expect("rings close");
                let din = (cur.0 as i64 - prev.0 as i64, cur.1 as i64 - prev.1 as i64);
                // At a corner where two pixels of the patch meet diagonally, take the turn
                // that goes round the pixel just walked (the same turn as round one pixel).
                let k = if outs.len() == 1 {
                    0
                } else {
                    outs.iter()
                        .position(|&o| {
                            let dout = (o.0 as i64 - cur.0 as i64, o.1 as i64 - cur.1 as i64);
                            din.0 * dout.1 - din.1 * dout.0 < 0
                        })
                        .unwrap_or(0)
                };
                let next = outs.swap_remove(k);
                ring.push(next);
                prev = cur;
                cur = next;
            }
            for part in split_pinches(&ring) {
                rings[i as usize].push(simplify(&part));
            }
        }
    }
    (1..=n as usize)
        .map(|i| {
            let mut rs = std::mem::take(&mut rings[i]);
            // The outer ring goes round the way a single pixel does (negative shoelace sum
            // in column/row coordinates); holes go the other way.
            let k = (0..rs.len())
                .min_by_key(|&k| twice_area(&rs[k]))
                .unwrap_or(0);
            rs.swap(0, k);
            Patch {
                value: values[first[i]],
                pixels: pixels[i],
                first_pixel: first[i],
                rings: rs,
            }
        })
        .collect()
}

/// Splits a closed ring that passes through one vertex more than once into rings that do
/// not (OGC simple features allow rings to touch at a point, not a ring to touch itself).
fn split_pinches(ring: &[(u32, u32)]) -> Vec<Vec<(u32, u32)>> {
    let mut parts = Vec::new();
    let mut path: Vec<(u32, u32)> = Vec::with_capacity(ring.len());
    let mut at: HashMap<(u32, u32), usize> = HashMap::new();
    for &v in &ring[..ring.len() - 1] {
        if let Some(&k) = at.get(&v) {
            let mut part: Vec<(u32, u32)> = path.drain(k..).collect();
            for u in &part {
                at.remove(u);
            }
            part.push(v);
            parts.push(part);
        }
        at.insert(v, path.len());
        path.push(v);
    }
    path.push(path[0]);
    parts.push(path);
    parts
}

/// Drops vertices where the ring goes straight on (keeping one every [`MAX_RUN`] pixels);
/// the ring stays closed.
fn simplify(ring: &[(u32, u32)]) -> Vec<(u32, u32)> {
    let n = ring.len() - 1; // closed: last == first
    let dir = |a: (u32, u32), b: (u32, u32)| {
        (
            (b.0 as i64 - a.0 as i64).signum(),
            (b.1 as i64 - a.1 as i64).signum(),
        )
    };
    // Start at a corner so the closing vertex is a real one.
    let start = (0..n)
        .find(|&k| {
            let prev = ring[(k + n - 1) % n];
            dir(prev, ring[k]) != dir(ring[k], ring[k + 1])
        })
        .unwrap_or(0);
    let mut out = vec![ring[start]];
    let mut run = 0u32;
    for step in 1..n {
        let k = (start + step) % n;
        let prev = ring[(k + n - 1) % n];
        let next = ring[(k + 1) % n];
        run += 1;
        if dir(prev, ring[k]) != dir(ring[k], next) || run >= MAX_RUN {
            out.push(ring[k]);
            run = 0;
        }
    }
    out.push(ring[start]);
    out
}

/// Area of a patch from its rings, in pixels (outer minus holes).
pub fn ring_pixels(patch: &Patch) -> i64 {
    let outer = twice_area(&patch.rings[0]).abs();
    let holes: i64 = patch.rings[1..].iter().map(|r| twice_area(r).abs()).sum();
    (outer - holes) / 2
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Rings enclose exactly their pixels, corner-touching pixels are separate patches,
    /// holes are cut out (hand-drawn cases, counted by hand).
    #[test]
    fn rings_enclose_exactly_their_pixels() {
        #[rustfmt::skip]
        let v: Vec<u8> = vec![
            1, 1, 1, 1, 2,
            1, 2, 2, 1, 2,
            1, 2, 1, 1, 1,
            1, 1, 1, 3, 1,
            3, 1, 1, 1, 3,
        ];
        let patches = vectorise(&v, 5, 5);
        // Patches: the big ring of 1 (17 px), the 2s inside (3 px), the 2s on the right
        // (2 px), the 3 inside (1 px), the two 3s in the corners (1 px each).
        let mut sizes: Vec<(u8, u64)> = patches.iter().map(|p| (p.value, p.pixels)).collect();
        sizes.sort();
        assert_eq!(sizes, vec![(1, 17), (2, 2), (2, 3), (3, 1), (3, 1), (3, 1)]);
        for p in &patches {
            assert_eq!(ring_pixels(p), p.pixels as i64, "{p:?}");
            for r in &p.rings {
                assert_eq!(r.first(), r.last());
            }
        }
        let big = patches.iter().find(|p| p.pixels == 17).unwrap();
        assert_eq!(
            big.rings.len(),
            3,
            "outer ring and holes for the 2s and the inner 3"
        );
    }

    /// A hole that touches the outside at one corner: the ring would pass that corner
    /// twice; it is split into an outer ring and a hole that touch there, as OGC simple
    /// features require (checked with GDAL/shapely by tests/reference/check_landcover_polygons.py).
    #[test]
    fn a_ring_never_passes_a_vertex_twice() {
        #[rustfmt::skip]
        let v: Vec<u8> = vec![
            1, 1, 1, 0,
            1, 0, 1, 0,
            1, 1, 0, 0,
        ];
        let patches = vectorise(&v, 4, 3);
        assert_eq!(patches.len(), 1);
        let p = &patches[0];
        assert_eq!(p.pixels, 7);
        assert_eq!(ring_pixels(p), 7);
        assert_eq!(p.rings.len(), 2, "{p:?}");
        for r in &p.rings {
            let mut inner = r[..r.len() - 1].to_vec();
            inner.sort_unstable();
            inner.dedup();
            assert_eq!(inner.len(), r.len() - 1, "a vertex repeats in {r:?}");
        }
        assert!(twice_area(&p.rings[0]) < 0 && twice_area(&p.rings[1]) > 0);
    }

    #[test]
    fn diagonal_neighbours_are_separate_and_their_rings_do_not_cross() {
        let v: Vec<u8> = vec![1, 2, 2, 1];
        let patches = vectorise(&v, 2, 2);
        assert_eq!(patches.len(), 4);
        for p in &patches {
            assert_eq!(p.rings.len(), 1);
            assert_eq!(
                p.rings[0].len(),
                5,
                "a square: 4 corners and the closing vertex"
            );
        }
    }
}
