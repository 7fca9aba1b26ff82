//! Ground truth: the causal graph of a drawn system and the label of every observed pair.

use serde::{Deserialize, Serialize};

use crate::drawn::DrawnParams;

/// Ground-truth relation of an ordered pair (driver, response).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Label {
    /// The driver appears in the response's equation.
    Direct,
    /// The driver reaches the response only through other variables.
    Indirect,
    /// No path from driver to response, but a common cause reaches both.
    Confounded,
    /// None of the above.
    Independent,
}

impl Label {
    /// The label as written in `truth.csv`.
    pub fn as_str(self) -> &'static str {
        match self {
            Label::Direct => "direct",
            Label::Indirect => "indirect",
            Label::Confounded => "confounded",
            Label::Independent => "independent",
        }
    }
}

impl std::fmt::Display for Label {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// One row of the answer key.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct TruthRow {
    /// Driver column name.
    pub driver: String,
    /// Response column name.
    pub response: String,
    /// Relation of driver to response.
    pub label: Label,
}

/// The variable-level causal graph: a node per state variable of every unit (hidden ones
/// included) and per hidden driver; an edge `a -> b` when `a` appears in `b`'s equation.
pub(crate) struct Graph {
    /// `parents[b]`: nodes with an edge into `b`.
    parents: Vec<Vec<usize>>,
    children: Vec<Vec<usize>>,
}

impl Graph {
    pub(crate) fn of(d: &DrawnParams) -> (Graph, Vec<usize>) {
        let f = d.family;
        let dim = f.var_names().len();
        let offset: Vec<usize> = (0..d.units.len()).map(|u| u * dim).collect();
        let n = d.units.len() * dim + d.drivers.len();
        let mut edges = vec![];
        for &o in &offset {
            edges.extend(f.internal_edges().into_iter().map(|(a, b)| (o + a, o + b)));
        }
        for c in &d.couplings {
            for &t in f.coupling_targets() {
                edges.push((offset[c.from] + f.port(), offset[c.to] + t));
            }
        }
        for (k, drv) in d.drivers.iter().enumerate() {
            let node = d.units.len() * dim + k;
            for &(u, _) in &drv.targets {
                edges.extend(f.forced_vars().iter().map(|&v| (node, offset[u] + v)));
            }
        }
        let mut parents = vec![vec![]; n];
        let mut children = vec![vec![]; n];
        for (a, b) in edges {
            if a != b && !parents[b].contains(&a) {
                parents[b].push(a);
                children[a].push(b);
            }
        }
        (Graph { parents, children }, offset)
    }

    /// Nodes that reach `target` (excluding `target`) along paths that avoid `blocked`.
    fn ancestors_avoiding(&self, target: usize, blocked: usize) -> Vec<bool> {
        let mut seen = vec![false; self.parents.len()];
        let mut stack = vec![target];
        while let Some(v) = stack.pop() {
            for &p in &self.parents[v] {
                if p != blocked && p != target && !seen[p] {
                    seen[p] = true;
                    stack.push(p);
                }
            }
        }
        seen
    }

    /// True when a directed path leads from `from` to `to`.
    pub(crate) fn reaches(&self, from: usize, to: usize) -> bool {
        let mut seen = vec![false; self.children.len()];
        let mut stack = vec![from];
        while let Some(v) = stack.pop() {
            for &c in &self.children[v] {
                if c == to {
                    return true;
                }
                if !seen[c] {
                    seen[c] = true;
                    stack.push(c);
                }
            }
        }
        false
    }

    /// Label precedence: direct edge; else a directed path; else a common cause with
    /// paths to each that avoid the other; else independent.
    pub(crate) fn label(&self, driver: usize, response: usize) -> Label {
        if self.parents[response].contains(&driver) {
            Label::Direct
        } else if self.reaches(driver, response) {
            Label::Indirect
        } else {
            let a = self.ancestors_avoiding(driver, response);
            let b = self.ancestors_avoiding(response, driver);
            if a.iter().zip(&b).any(|(x, y)| *x && *y) {
                Label::Confounded
            } else {
                Label::Independent
            }
        }
    }
}

/// Observed columns in output order (by unit number, port first) with their graph nodes.
pub(crate) fn observed_columns(
    d: &DrawnParams,
    offset: &[usize],
) -> Vec<(String, usize, usize, usize)> {
    let mut cols = vec![];
    for (u, unit) in d.units.iter().enumerate() {
        for o in &unit.observed {
            cols.push((o.name.clone(), u, o.state, offset[u] + o.state));
        }
    }
    // Names end in the unit's shuffled number, so sorting by (number, position) hides which
    // unit was drawn first.
    cols.sort_by(|a, b| {
        let num = |s: &str| {
            s.rsplit('_')
                .next()
                .and_then(|n| n.parse::<usize>().ok())
                .unwrap_or(0)
        };
        num(&a.0).cmp(&num(&b.0)).then(a.2.cmp(&b.2))
    });
    cols
}

/// Truth rows for every ordered pair of observed columns.
pub(crate) fn truth(d: &DrawnParams) -> Vec<TruthRow> {
    let (g, offset) = Graph::of(d);
    let cols = observed_columns(d, &offset);
    let mut rows = vec![];
    for a in &cols {
        for b in &cols {
            if a.3 != b.3 {
                rows.push(TruthRow {
                    driver: a.0.clone(),
                    response: b.0.clone(),
                    label: g.label(a.3, b.3),
                });
            }
        }
    }
    rows
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::drawn::{CouplingDraw, DriverDraw, DriverKind, ObservedVar, Structure, UnitDraw};
    use crate::family::Family;

    fn system(
        family: Family,
        observed: &[bool],
        links: &[(usize, usize)],
        drivers: Vec<DriverDraw>,
    ) -> DrawnParams {
        let units = observed
            .iter()
            .enumerate()
            .map(|(u, &o)| UnitDraw {
                observed: if o {
                    vec![ObservedVar {
                        state: family.port(),
                        name: format!("v_{}", u + 1),
                    }]
                } else {
                    vec![]
                },
                params: Default::default(),
                initial: vec![],
            })
            .collect();
        DrawnParams {
            id: "t".into(),
            index: 0,
            attempt: 0,
            family,
            structure: Structure::Network,
            units,
            couplings: links
                .iter()
                .map(|&(from, to)| CouplingDraw {
                    from,
                    to,
                    strength: 0.1,
                })
                .collect(),
            drivers,
            interval: 1.0,
            thinning: 1,
            length: 100,
            transient: 0,
            observation_noise: 0.0,
            process_noise: 0.0,
            missing_fraction: 0.0,
            noise_seed: 0,
        }
    }

    fn label(rows: &[TruthRow], d: &str, r: &str) -> Label {
        rows.iter()
            .find(|t| t.driver == d && t.response == r)
            .unwrap()
            .label
    }

    #[test]
    fn one_way_lorenz_reverse_is_independent_not_confounded() {
        // The driver's own hidden y, z reach the response only through the driver's x.
        let rows = truth(&system(Family::Lorenz, &[true, true], &[(0, 1)], vec![]));
        assert_eq!(label(&rows, "v_1", "v_2"), Label::Direct);
        assert_eq!(label(&rows, "v_2", "v_1"), Label::Independent);
    }

    #[test]
    fn chain_through_hidden_middle_is_indirect() {
        let rows = truth(&system(
            Family::Logistic,
            &[true, false, true],
            &[(0, 1), (1, 2)],
            vec![],
        ));
        assert_eq!(rows.len(), 2);
        assert_eq!(label(&rows, "v_1", "v_3"), Label::Indirect);
        assert_eq!(label(&rows, "v_3", "v_1"), Label::Independent);
    }

    #[test]
    fn hidden_and_observed_common_drivers_confound() {
        let rows = truth(&system(
            Family::Rossler,
            &[false, true, true],
            &[(0, 1), (0, 2)],
            vec![],
        ));
        assert_eq!(label(&rows, "v_2", "v_3"), Label::Confounded);
        let rows = truth(&system(
            Family::Ricker,
            &[true, true, true],
            &[(0, 1), (0, 2)],
            vec![],
        ));
        assert_eq!(label(&rows, "v_2", "v_3"), Label::Confounded);
        assert_eq!(label(&rows, "v_1", "v_3"), Label::Direct);
    }

    #[test]
    fn shared_forcing_confounds() {
        let drv = DriverDraw {
            kind: DriverKind::Seasonal {
                period: 12.0,
                phase: 0.0,
            },
            targets: vec![(0, 0.1), (1, 0.1)],
        };
        let rows = truth(&system(Family::Henon, &[true, true], &[], vec![drv]));
        assert!(rows.iter().all(|r| r.label == Label::Confounded));
    }

    #[test]
    fn sir_coupling_reaches_both_compartments() {
        let d = system(Family::Sir, &[true, true], &[(0, 1)], vec![]);
        let rows = truth(&d);
        assert_eq!(label(&rows, "v_1", "v_2"), Label::Direct);
        assert_eq!(label(&rows, "v_2", "v_1"), Label::Independent);
    }
}
