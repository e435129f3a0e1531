//! The dependency graph: which declarations each declaration's proof and statement refer to.
//!
//! Takes edge lists from the resolver; gives compact compressed-sparse-row arrays (u32 ids)
//! in both directions, separately for proof references (the premises a proof used) and
//! statement references. It holds ids only: names and text live in the library model.

use serde::{Deserialize, Serialize};

use super::model::DeclId;

/// Adjacency in compressed sparse row form: the neighbours of node `i` are
/// `targets[offsets[i]..offsets[i + 1]]`, sorted and without repeats.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Csr {
    offsets: Vec<u32>,
    targets: Vec<u32>,
}

impl Csr {
    /// Builds the adjacency of `nodes` nodes from `(source, target)` edges. Repeated edges
    /// collapse into one; edges naming a node outside `0..nodes` are ignored.
    pub fn from_edges(nodes: usize, edges: &[(u32, u32)]) -> Csr {
        let mut sorted: Vec<(u32, u32)> = edges
            .iter()
            .copied()
            .filter(|&(s, t)| (s as usize) < nodes && (t as usize) < nodes)
            .collect();
        sorted.sort_unstable();
        sorted.dedup();
        let mut offsets = vec![0u32; nodes + 1];
        for &(s, _) in &sorted {
            offsets[s as usize + 1] += 1;
        }
        for i in 0..nodes {
            offsets[i + 1] += offsets[i];
        }
        let targets = sorted.into_iter().map(|(_, t)| t).collect();
        Csr { offsets, targets }
    }

    /// The same edges reversed.
    pub fn transposed(&self) -> Csr {
        let nodes = self.node_count();
        let mut edges = Vec::with_capacity(self.targets.len());
        for s in 0..nodes {
            for &t in self.neighbours_raw(s) {
                edges.push((t, s as u32));
            }
        }
        Csr::from_edges(nodes, &edges)
    }

    /// Number of nodes.
    pub fn node_count(&self) -> usize {
        self.offsets.len().saturating_sub(1)
    }

    /// Number of edges.
    pub fn edge_count(&self) -> usize {
        self.targets.len()
    }

    fn neighbours_raw(&self, node: usize) -> &[u32] {
        match (self.offsets.get(node), self.offsets.get(node + 1)) {
            (Some(&a), Some(&b)) => &self.targets[a as usize..b as usize],
            _ => &[],
        }
    }

    /// The neighbours of `node` (empty for an id outside the graph).
    pub fn neighbours(&self, node: DeclId) -> impl Iterator<Item = DeclId> + '_ {
        self.neighbours_raw(node.0 as usize)
            .iter()
            .map(|&t| DeclId(t))
    }

    /// How many neighbours `node` has.
    pub fn degree(&self, node: DeclId) -> usize {
        self.neighbours_raw(node.0 as usize).len()
    }

    /// Checks the arrays are well formed (after loading from disk).
    pub fn validate(&self) -> Result<(), String> {
        if self.offsets.is_empty() {
            return if self.targets.is_empty() {
                Ok(())
            } else {
                Err("edges without nodes".into())
            };
        }
        if self.offsets[0] != 0 {
            return Err("first offset is not 0".into());
        }
        if self.offsets.windows(2).any(|w| w[0] > w[1]) {
            return Err("offsets decrease".into());
        }
        if *self.offsets.last().unwrap_or(&0) as usize != self.targets.len() {
            return Err("last offset does not match the edge count".into());
        }
        let nodes = self.node_count() as u32;
        if self.targets.iter().any(|&t| t >= nodes) {
            return Err("an edge names a node outside the graph".into());
        }
        Ok(())
    }
}

/// Proof and statement references in both directions.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct DependencyGraph {
    /// declaration → the declarations its proof (or body) refers to: its premises.
    pub proof_uses: Csr,
    /// declaration → the declarations whose proofs refer to it.
    pub proof_used_by: Csr,
    /// declaration → the declarations its statement refers to.
    pub statement_uses: Csr,
    /// declaration → the declarations whose statements refer to it.
    pub statement_used_by: Csr,
}

impl DependencyGraph {
    /// Builds both directions from forward edge lists over `nodes` declarations.
    pub fn from_edges(
        nodes: usize,
        proof_edges: &[(u32, u32)],
        statement_edges: &[(u32, u32)],
    ) -> DependencyGraph {
        let proof_uses = Csr::from_edges(nodes, proof_edges);
        let statement_uses = Csr::from_edges(nodes, statement_edges);
        DependencyGraph {
            proof_used_by: proof_uses.transposed(),
            statement_used_by: statement_uses.transposed(),
            proof_uses,
            statement_uses,
        }
    }

    /// The premises `decl`'s proof refers to.
    pub fn premises(&self, decl: DeclId) -> impl Iterator<Item = DeclId> + '_ {
        self.proof_uses.neighbours(decl)
    }

    /// The declarations whose proofs refer to `decl`.
    pub fn dependents(&self, decl: DeclId) -> impl Iterator<Item = DeclId> + '_ {
        self.proof_used_by.neighbours(decl)
    }

    /// Checks every part for a graph over `nodes` declarations.
    pub fn validate(&self, nodes: usize) -> Result<(), String> {
        for (name, csr) in [
            ("proof_uses", &self.proof_uses),
            ("proof_used_by", &self.proof_used_by),
            ("statement_uses", &self.statement_uses),
            ("statement_used_by", &self.statement_used_by),
        ] {
            csr.validate().map_err(|e| format!("{name}: {e}"))?;
            if csr.node_count() != nodes {
                return Err(format!(
                    "{name}: has {} nodes, the library has {nodes} declarations",
                    csr.node_count()
                ));
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn csr_dedups_sorts_and_transposes() {
        let g = Csr::from_edges(4, &[(2, 1), (0, 3), (0, 1), (0, 3), (3, 9)]);
        assert_eq!(
            g.neighbours(DeclId(0)).collect::<Vec<_>>(),
            vec![DeclId(1), DeclId(3)]
        );
        assert_eq!(g.neighbours(DeclId(1)).count(), 0);
        assert_eq!(g.edge_count(), 3);
        let t = g.transposed();
        assert_eq!(
            t.neighbours(DeclId(1)).collect::<Vec<_>>(),
            vec![DeclId(0), DeclId(2)]
        );
        assert_eq!(t.neighbours(DeclId(3)).collect::<Vec<_>>(), vec![DeclId(0)]);
        assert!(g.validate().is_ok());
        assert_eq!(g.neighbours(DeclId(99)).count(), 0);
    }

    #[test]
    fn validate_catches_bad_arrays() {
        let bad = Csr {
            offsets: vec![0, 2, 1],
            targets: vec![0],
        };
        assert!(bad.validate().is_err());
        let out = Csr {
            offsets: vec![0, 1],
            targets: vec![5],
        };
        assert!(out.validate().is_err());
    }
}
