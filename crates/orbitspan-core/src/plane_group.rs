//! The 17 plane groups as finite groups of affine maps on the pixel torus.
//!
//! Coordinates and settings follow MATH.md §6b: pixel `x = (x1, x2) = (row,
//! column)`, axis `a` down the rows, `b` along the columns, `(g, t)` acts as
//! `x ↦ g x + t (mod n)` and composes as `(g1,t1)(g2,t2) = (g1 g2, g1 t2 + t1)`.
//! Coset representatives are the coordinate triplets of International Tables
//! for Crystallography Vol. A with translations in units of the cell. The
//! hexagonal groups act on images sampled in lattice coordinates (basis at
//! 60°, rotation by 60° = `[[0,-1],[1,1]]`).
//!
//! A group is given here by generators; [`PointGroup::coset_representatives`]
//! closes them under composition modulo the lattice, so the element lists are
//! computed, not typed in, and checked against the ITA orders in the tests.

use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};

/// An integer 2x2 matrix acting on column vectors `(x1, x2)`.
pub type IntMatrix = [[i64; 2]; 2];

/// Identity matrix.
pub const IDENTITY: IntMatrix = [[1, 0], [0, 1]];

/// Matrix product `a b`.
pub fn mat_mul(a: &IntMatrix, b: &IntMatrix) -> IntMatrix {
    [
        [a[0][0] * b[0][0] + a[0][1] * b[1][0], a[0][0] * b[0][1] + a[0][1] * b[1][1]],
        [a[1][0] * b[0][0] + a[1][1] * b[1][0], a[1][0] * b[0][1] + a[1][1] * b[1][1]],
    ]
}

/// Matrix-vector product `a v`.
pub fn mat_vec(a: &IntMatrix, v: [i64; 2]) -> [i64; 2] {
    [a[0][0] * v[0] + a[0][1] * v[1], a[1][0] * v[0] + a[1][1] * v[1]]
}

/// Transpose `aᵀ` (the dual action on frequencies is `ξ ↦ gᵀ ξ`).
pub fn transpose(a: &IntMatrix) -> IntMatrix {
    [[a[0][0], a[1][0]], [a[0][1], a[1][1]]]
}

/// The lattice systems of the plane (International Tables Vol. A).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum LatticeType {
    Oblique,
    Rectangular,
    /// Centred rectangular.
    Centred,
    Square,
    Hexagonal,
}

/// The Hermann–Mauguin symbol of one of the 17 plane groups.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum GroupSymbol {
    P1,
    P2,
    Pm,
    Pg,
    Cm,
    Pmm,
    Pmg,
    Pgg,
    Cmm,
    P4,
    P4m,
    P4g,
    P3,
    P3m1,
    P31m,
    P6,
    P6m,
}

/// Which of the two axis settings of a group: the ITA standard, or the one
/// with the axes `a` and `b` exchanged (written with the suffix `:ba`).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Setting {
    #[default]
    Standard,
    Exchanged,
}

/// A plane group in a given axis setting.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub struct PlaneGroup {
    pub symbol: GroupSymbol,
    pub setting: Setting,
}

/// One point-group element with its coset representative `(g, t)`; `t` is in
/// units of the conventional cell (so ½ is written `half`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct CellOp {
    pub g: IntMatrix,
    /// Translation in half cells: `t = half / 2` in units of the cell axes.
    pub half: [i64; 2],
}

impl GroupSymbol {
    /// All 17 groups in the order of International Tables Vol. A (No. 1–17).
    pub const ALL: [GroupSymbol; 17] = [
        GroupSymbol::P1,
        GroupSymbol::P2,
        GroupSymbol::Pm,
        GroupSymbol::Pg,
        GroupSymbol::Cm,
        GroupSymbol::Pmm,
        GroupSymbol::Pmg,
        GroupSymbol::Pgg,
        GroupSymbol::Cmm,
        GroupSymbol::P4,
        GroupSymbol::P4m,
        GroupSymbol::P4g,
        GroupSymbol::P3,
        GroupSymbol::P3m1,
        GroupSymbol::P31m,
        GroupSymbol::P6,
        GroupSymbol::P6m,
    ];

    /// The short Hermann–Mauguin symbol (`p4m`, `cmm`, …).
    pub fn short(self) -> &'static str {
        use GroupSymbol::*;
        match self {
            P1 => "p1",
            P2 => "p2",
            Pm => "pm",
            Pg => "pg",
            Cm => "cm",
            Pmm => "pmm",
            Pmg => "pmg",
            Pgg => "pgg",
            Cmm => "cmm",
            P4 => "p4",
            P4m => "p4m",
            P4g => "p4g",
            P3 => "p3",
            P3m1 => "p3m1",
            P31m => "p31m",
            P6 => "p6",
            P6m => "p6m",
        }
    }

    /// The full Hermann–Mauguin symbol (`p2mm`, `c2mm`, `p4gm`, …).
    pub fn full(self) -> &'static str {
        use GroupSymbol::*;
        match self {
            Pm => "p1m1",
            Pg => "p1g1",
            Cm => "c1m1",
            Pmm => "p2mm",
            Pmg => "p2mg",
            Pgg => "p2gg",
            Cmm => "c2mm",
            P4m => "p4mm",
            P4g => "p4gm",
            P6m => "p6mm",
            other => other.short(),
        }
    }

    /// The lattice system the group requires.
    pub fn lattice_type(self) -> LatticeType {
        use GroupSymbol::*;
        match self {
            P1 | P2 => LatticeType::Oblique,
            Pm | Pg | Pmm | Pmg | Pgg => LatticeType::Rectangular,
            Cm | Cmm => LatticeType::Centred,
            P4 | P4m | P4g => LatticeType::Square,
            P3 | P3m1 | P31m | P6 | P6m => LatticeType::Hexagonal,
        }
    }

    /// True for the hexagonal groups, which act only in lattice coordinates.
    pub fn is_hexagonal(self) -> bool {
        self.lattice_type() == LatticeType::Hexagonal
    }

    /// True for the centred groups (cm, cmm): the lattice contains the centring
    /// vector `(A/2, B/2)` of the conventional `A x B` cell.
    pub fn is_centred(self) -> bool {
        self.lattice_type() == LatticeType::Centred
    }

    /// Generators of the point group with their coset representatives, in the
    /// standard setting (ITA general positions, from which the rest follow).
    fn generators(self) -> Vec<CellOp> {
        use GroupSymbol::*;
        let op = |g: IntMatrix, half: [i64; 2]| CellOp { g, half };
        let rot2 = [[-1, 0], [0, -1]];
        let mx = [[-1, 0], [0, 1]]; // (-x, y): mirror perpendicular to a
        let rot4 = [[0, -1], [1, 0]]; // (-y, x)
        let rot6 = [[0, -1], [1, 1]]; // 60° in the 60°-basis
        let rot3 = mat_mul(&rot6, &rot6);
        let m_along_a1 = [[1, 1], [0, -1]]; // fixes a1: p31m
        let m_perp_a1 = [[-1, -1], [0, 1]]; // reverses a1: p3m1
        match self {
            P1 => vec![],
            P2 => vec![op(rot2, [0, 0])],
            Pm => vec![op(mx, [0, 0])],
            Pg => vec![op(mx, [0, 1])],                       // (-x, y+½)
            Cm => vec![op(mx, [0, 0])],                       // centring is in the lattice
            Pmm => vec![op(rot2, [0, 0]), op(mx, [0, 0])],
            Pmg => vec![op(rot2, [0, 0]), op(mx, [1, 0])],    // (-x+½, y)
            Pgg => vec![op(rot2, [0, 0]), op(mx, [1, 1])],    // (-x+½, y+½)
            Cmm => vec![op(rot2, [0, 0]), op(mx, [0, 0])],
            P4 => vec![op(rot4, [0, 0])],
            P4m => vec![op(rot4, [0, 0]), op(mx, [0, 0])],
            P4g => vec![op(rot4, [0, 0]), op(mx, [1, 1])],    // (-x+½, y+½)
            P3 => vec![op(rot3, [0, 0])],
            P3m1 => vec![op(rot3, [0, 0]), op(m_perp_a1, [0, 0])],
            P31m => vec![op(rot3, [0, 0]), op(m_along_a1, [0, 0])],
            P6 => vec![op(rot6, [0, 0])],
            P6m => vec![op(rot6, [0, 0]), op(m_along_a1, [0, 0])],
        }
    }
}

impl PlaneGroup {
    /// The group in its standard setting.
    pub fn standard(symbol: GroupSymbol) -> Self {
        PlaneGroup { symbol, setting: Setting::Standard }
    }

    /// Parses `p4m`, `p4mm`, `pmg:ba` (axes exchanged), case-insensitive.
    pub fn parse(text: &str) -> Result<PlaneGroup> {
        let t = text.trim().to_ascii_lowercase();
        let (name, setting) = match t.strip_suffix(":ba") {
            Some(n) => (n, Setting::Exchanged),
            None => (t.as_str(), Setting::Standard),
        };
        let symbol = GroupSymbol::ALL
            .iter()
            .copied()
            .find(|s| s.short() == name || s.full() == name)
            .ok_or_else(|| {
                Error::input(format!(
                    "unknown plane group '{text}'; use one of: {}",
                    GroupSymbol::ALL.iter().map(|s| s.short()).collect::<Vec<_>>().join(", ")
                ))
            })?;
        Ok(PlaneGroup { symbol, setting })
    }

    /// The name as written by [`PlaneGroup::parse`]: `pmg` or `pmg:ba`.
    pub fn name(&self) -> String {
        match self.setting {
            Setting::Standard => self.symbol.short().to_string(),
            Setting::Exchanged => format!("{}:ba", self.symbol.short()),
        }
    }

    /// The point group with one coset representative per element, closed
    /// under composition modulo the lattice, identity first, in a fixed order.
    /// In the exchanged setting every operation is conjugated by the swap of
    /// the two axes.
    pub fn point_group(&self) -> PointGroup {
        let swap: IntMatrix = [[0, 1], [1, 0]];
        let gens: Vec<CellOp> = self
            .symbol
            .generators()
            .into_iter()
            .map(|o| match self.setting {
                Setting::Standard => o,
                Setting::Exchanged => CellOp {
                    g: mat_mul(&swap, &mat_mul(&o.g, &swap)),
                    half: [o.half[1], o.half[0]],
                },
            })
            .collect();
        let centred = self.symbol.is_centred();
        // Reduce a half-cell translation modulo the lattice (in half cells:
        // primitive lattice = 2Z x 2Z; centred adds (1,1)).
        let reduce = |h: [i64; 2]| -> [i64; 2] {
            let mut r = [h[0].rem_euclid(2), h[1].rem_euclid(2)];
            if centred && r == [1, 1] {
                r = [0, 0];
            }
            r
        };
        let mut ops = vec![CellOp { g: IDENTITY, half: [0, 0] }];
        let mut i = 0;
        while i < ops.len() {
            for gen in &gens {
                let a = ops[i];
                // gen ∘ a = (g_gen g_a, g_gen t_a + t_gen)
                let t = mat_vec(&gen.g, a.half);
                let c = CellOp {
                    g: mat_mul(&gen.g, &a.g),
                    half: reduce([t[0] + gen.half[0], t[1] + gen.half[1]]),
                };
                if !ops.iter().any(|o| o.g == c.g) {
                    ops.push(c);
                }
            }
            i += 1;
        }
        PointGroup { group: *self, ops }
    }
}

/// A point group `G = Γ / Λ` with one coset representative per element.
#[derive(Clone, Debug)]
pub struct PointGroup {
    pub group: PlaneGroup,
    ops: Vec<CellOp>,
}

impl PointGroup {
    /// Coset representatives, identity first.
    pub fn coset_representatives(&self) -> &[CellOp] {
        &self.ops
    }
    /// The order `|G|`.
    pub fn order(&self) -> usize {
        self.ops.len()
    }
    /// True when every coset has a representative with `t = 0` modulo the
    /// lattice (found by trying every origin on the half-cell grid).
    pub fn is_symmorphic(&self) -> bool {
        // Moving the origin by `o` changes t to t + (g - I) o. Symmorphic iff
        // some o (in quarter cells suffices for plane groups) zeroes all t.
        let centred = self.group.symbol.is_centred();
        (0..4).any(|o1| {
            (0..4).any(|o2| {
                self.ops.iter().all(|op| {
                    // in quarter cells: t = 2*half + (g - I) o
                    let go = mat_vec(&op.g, [o1, o2]);
                    let q = [2 * op.half[0] + go[0] - o1, 2 * op.half[1] + go[1] - o2];
                    let r = [q[0].rem_euclid(4), q[1].rem_euclid(4)];
                    r == [0, 0] || (centred && r == [2, 2])
                })
            })
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use GroupSymbol::*;

    /// International Tables for Crystallography Vol. A, the 17 plane groups:
    /// number, full symbol, lattice system, point-group order, and whether the
    /// group is symmorphic (values from memory of the ITA tables; they are
    /// the standard textbook facts).
    const ITA: [(usize, GroupSymbol, &str, LatticeType, usize, bool); 17] = [
        (1, P1, "p1", LatticeType::Oblique, 1, true),
        (2, P2, "p2", LatticeType::Oblique, 2, true),
        (3, Pm, "p1m1", LatticeType::Rectangular, 2, true),
        (4, Pg, "p1g1", LatticeType::Rectangular, 2, false),
        (5, Cm, "c1m1", LatticeType::Centred, 2, true),
        (6, Pmm, "p2mm", LatticeType::Rectangular, 4, true),
        (7, Pmg, "p2mg", LatticeType::Rectangular, 4, false),
        (8, Pgg, "p2gg", LatticeType::Rectangular, 4, false),
        (9, Cmm, "c2mm", LatticeType::Centred, 4, true),
        (10, P4, "p4", LatticeType::Square, 4, true),
        (11, P4m, "p4mm", LatticeType::Square, 8, true),
        (12, P4g, "p4gm", LatticeType::Square, 8, false),
        (13, P3, "p3", LatticeType::Hexagonal, 3, true),
        (14, P3m1, "p3m1", LatticeType::Hexagonal, 6, true),
        (15, P31m, "p31m", LatticeType::Hexagonal, 6, true),
        (16, P6, "p6", LatticeType::Hexagonal, 6, true),
        (17, P6m, "p6mm", LatticeType::Hexagonal, 12, true),
    ];

    #[test]
    fn all_17_groups_match_international_tables() {
        for (number, symbol, full, lattice, order, symmorphic) in ITA {
            assert_eq!(GroupSymbol::ALL[number - 1], symbol);
            assert_eq!(symbol.full(), full);
            assert_eq!(symbol.lattice_type(), lattice, "{full}");
            for setting in [Setting::Standard, Setting::Exchanged] {
                let pg = PlaneGroup { symbol, setting }.point_group();
                assert_eq!(pg.order(), order, "{full}: point group order");
                assert_eq!(pg.is_symmorphic(), symmorphic, "{full}: symmorphic");
                // every g has det ±1 and the identity comes first
                assert_eq!(pg.coset_representatives()[0].g, IDENTITY);
                for op in pg.coset_representatives() {
                    let det = op.g[0][0] * op.g[1][1] - op.g[0][1] * op.g[1][0];
                    assert!(det == 1 || det == -1);
                }
            }
        }
    }

    #[test]
    fn glide_translations_are_those_of_the_tables() {
        // ITA general positions (from memory): pg (-x, y+1/2); pmg (-x+1/2, y), (x+1/2, -y);
        // pgg (-x+1/2, y+1/2), (x+1/2, -y+1/2).
        let ops = |s: GroupSymbol| PlaneGroup::standard(s).point_group().coset_representatives().to_vec();
        let has = |s: GroupSymbol, g: IntMatrix, half: [i64; 2]| ops(s).contains(&CellOp { g, half });
        assert!(has(Pg, [[-1, 0], [0, 1]], [0, 1]));
        assert!(has(Pmg, [[-1, 0], [0, 1]], [1, 0]));
        assert!(has(Pmg, [[1, 0], [0, -1]], [1, 0]));
        assert!(has(Pgg, [[-1, 0], [0, 1]], [1, 1]));
        assert!(has(Pgg, [[1, 0], [0, -1]], [1, 1]));
        // exchanged setting of pg: (x+1/2, -y)
        let pg_ba = PlaneGroup::parse("pg:ba").unwrap().point_group();
        assert!(pg_ba.coset_representatives().contains(&CellOp { g: [[1, 0], [0, -1]], half: [1, 0] }));
    }

    /// Is the point `p/3` (lattice coordinates) on a mirror of the group?
    fn on_mirror(symbol: GroupSymbol, p: [i64; 2]) -> bool {
        let pg = PlaneGroup::standard(symbol).point_group();
        pg.coset_representatives().iter().any(|op| {
            let det = op.g[0][0] * op.g[1][1] - op.g[0][1] * op.g[1][0];
            let q = mat_vec(&op.g, p);
            // g p + 3k = p for some integer lattice vector k
            det == -1 && (q[0] - p[0]).rem_euclid(3) == 0 && (q[1] - p[1]).rem_euclid(3) == 0
        })
    }

    #[test]
    fn p3m1_has_all_threefold_centres_on_mirrors_p31m_not() {
        // Threefold centres of the 60° cell: (0,0), (1/3,1/3), (2/3,2/3)
        // (ITA Vol. A symmetry diagrams of p3m1 and p31m).
        for p in [[1, 1], [2, 2]] {
            assert!(on_mirror(P3m1, p), "p3m1 centre {p:?}/3 should lie on a mirror");
            assert!(!on_mirror(P31m, p), "p31m centre {p:?}/3 should not lie on a mirror");
            assert!(on_mirror(P6m, p));
        }
        assert!(on_mirror(P31m, [0, 0]));
    }

    #[test]
    fn parse_accepts_short_full_and_exchanged_names() {
        assert_eq!(PlaneGroup::parse("P4MM").unwrap(), PlaneGroup::standard(P4m));
        assert_eq!(PlaneGroup::parse("pmg:ba").unwrap().setting, Setting::Exchanged);
        let msg = PlaneGroup::parse("p5").unwrap_err().to_string();
        assert!(msg.contains("unknown plane group 'p5'") && msg.contains("p6m"), "{msg}");
    }
}
