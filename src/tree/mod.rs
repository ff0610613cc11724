//! The power tree: rails, the stages and loads hanging off each, built once as a petgraph graph
//! and checked (every stage reachable from the battery, no stage feeding itself), with a cached
//! order for the downward (voltages) and upward (currents) walks.

use petgraph::algo::toposort;
use petgraph::graph::{DiGraph, NodeIndex};

/// Most stages in one chain from the battery to a load; deeper trees are rejected.
pub const MAX_DEPTH: usize = 200;

/// The checked tree. Rail 0 is the battery; rail `k + 1` is the output of stage `k`.
#[derive(Debug, Clone)]
pub struct Tree {
    stage_children: Vec<Vec<usize>>,
    load_children: Vec<Vec<usize>>,
    down: Vec<usize>,
    depth: Vec<usize>,
}

/// Why a tree cannot be built.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum TreeError {
    /// Stages that feed themselves: the stage indices around the loop, in feeding order.
    Cycle(Vec<usize>),
    /// A chain longer than [`MAX_DEPTH`]; the deepest stage.
    TooDeep(usize),
}

impl Tree {
    /// Build the tree from each stage's input rail and each load's rail.
    ///
    /// # Errors
    ///
    /// Every loop of stages feeding themselves, or a chain deeper than [`MAX_DEPTH`].
    ///
    /// # Examples
    ///
    /// ```
    /// use joulepath::tree::{Tree, TreeError};
    /// // stage 0 on the battery, stage 1 on stage 0, one load on stage 1.
    /// let t = Tree::build(&[0, 1], &[2]).unwrap();
    /// assert_eq!(t.down_order(), &[0, 1]);
    /// // stage 0 fed by stage 1 and stage 1 by stage 0: a loop.
    /// assert_eq!(Tree::build(&[2, 1], &[]).unwrap_err(), vec![TreeError::Cycle(vec![0, 1])]);
    /// ```
    pub fn build(stage_inputs: &[usize], load_rails: &[usize]) -> Result<Self, Vec<TreeError>> {
        let rails = stage_inputs.len() + 1;
        let mut g: DiGraph<usize, ()> = DiGraph::with_capacity(rails, rails);
        let nodes: Vec<NodeIndex> = (0..rails).map(|r| g.add_node(r)).collect();
        for (k, &input) in stage_inputs.iter().enumerate() {
            g.add_edge(nodes[input], nodes[k + 1], ());
        }
        if toposort(&g, None).is_err() {
            return Err(find_cycles(stage_inputs)
                .into_iter()
                .map(TreeError::Cycle)
                .collect());
        }
        let order = toposort(&g, None).unwrap_or_default();
        let mut stage_children = vec![Vec::new(); rails];
        let mut load_children = vec![Vec::new(); rails];
        for (k, &input) in stage_inputs.iter().enumerate() {
            stage_children[input].push(k);
        }
        for (l, &rail) in load_rails.iter().enumerate() {
            load_children[rail].push(l);
        }
        let down: Vec<usize> = order
            .into_iter()
            .map(|n| g[n])
            .filter(|&r| r > 0)
            .map(|r| r - 1)
            .collect();
        let mut depth = vec![0; stage_inputs.len()];
        for &k in &down {
            let input = stage_inputs[k];
            depth[k] = if input == 0 { 1 } else { depth[input - 1] + 1 };
            if depth[k] > MAX_DEPTH {
                return Err(vec![TreeError::TooDeep(k)]);
            }
        }
        Ok(Self {
            stage_children,
            load_children,
            down,
            depth,
        })
    }

    /// Stages fed by `rail`, in file order.
    pub fn stages_on(&self, rail: usize) -> &[usize] {
        &self.stage_children[rail]
    }

    /// Loads on `rail`, in file order.
    pub fn loads_on(&self, rail: usize) -> &[usize] {
        &self.load_children[rail]
    }

    /// Stages ordered so that each comes after the stage feeding it (the downward walk);
    /// reversed, it is the upward walk.
    pub fn down_order(&self) -> &[usize] {
        &self.down
    }

    /// Number of stages from the battery to stage `k`'s output (1 for a stage on the battery).
    pub fn depth(&self, k: usize) -> usize {
        self.depth[k]
    }

    /// Number of rails (the battery plus one per stage).
    pub fn rails(&self) -> usize {
        self.stage_children.len()
    }
}

/// Each distinct loop among stages that feed themselves, as stage indices in feeding order
/// starting at the lowest index.
fn find_cycles(stage_inputs: &[usize]) -> Vec<Vec<usize>> {
    let n = stage_inputs.len();
    let mut seen_in_cycle = vec![false; n];
    let mut cycles = Vec::new();
    for start in 0..n {
        // Follow the inputs upward; a loop is reached if we come back to a visited stage.
        let mut path = Vec::new();
        let mut on_path = vec![false; n];
        let mut k = start;
        loop {
            if on_path[k] {
                let pos = path.iter().position(|&p| p == k).unwrap_or(0);
                let mut cyc: Vec<usize> = path[pos..].to_vec();
                if !cyc.iter().any(|&c| seen_in_cycle[c]) {
                    for &c in &cyc {
                        seen_in_cycle[c] = true;
                    }
                    // Feeding order: input before consumer, so reverse the upward walk.
                    cyc.reverse();
                    let m = cyc
                        .iter()
                        .enumerate()
                        .min_by_key(|(_, c)| **c)
                        .map_or(0, |(i, _)| i);
                    cyc.rotate_left(m);
                    cycles.push(cyc);
                }
                break;
            }
            on_path[k] = true;
            path.push(k);
            let input = stage_inputs[k];
            if input == 0 {
                break;
            }
            k = input - 1;
        }
    }
    cycles
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn order_puts_feeders_first() {
        // stage 0 on stage 2, stage 1 on the battery, stage 2 on stage 1.
        let t = Tree::build(&[3, 0, 2], &[1, 0]).unwrap();
        let pos = |k: usize| t.down_order().iter().position(|&x| x == k).unwrap();
        assert!(pos(1) < pos(2) && pos(2) < pos(0));
        assert_eq!(t.depth(0), 3);
        assert_eq!(t.loads_on(0), &[1]);
        assert_eq!(t.stages_on(3), &[0]);
    }

    #[test]
    fn finds_a_three_stage_loop_and_a_self_feed() {
        // 0 <- 1 <- 2 <- 0 (each fed by the next), 3 fed by itself, 4 on the battery.
        let errs = Tree::build(&[2, 3, 1, 4, 0], &[]).unwrap_err();
        assert_eq!(
            errs,
            vec![TreeError::Cycle(vec![0, 2, 1]), TreeError::Cycle(vec![3])]
        );
    }

    #[test]
    fn rejects_a_chain_that_is_too_deep() {
        let inputs: Vec<usize> = (0..=MAX_DEPTH).collect();
        assert!(matches!(
            Tree::build(&inputs, &[]),
            Err(e) if matches!(e[0], TreeError::TooDeep(_))
        ));
    }
}
