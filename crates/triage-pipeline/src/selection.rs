//! Choosing which ordered pairs to scan: drivers and responses by name.
//!
//! The evidence for `d -> r` needs the response's manifold (forward skill, the rank and
//! mean among the response's drivers) and the driver's manifold (the opposite direction, and
//! the shared-driver context). So the manifolds computed are the union of the chosen drivers
//! and responses, each with every other variable as a target: the neighbour tables are built
//! once per manifold and shared by every target, so extra targets cost little, and the
//! features of a chosen pair are exactly those a full scan gives it.

/// Drivers and responses chosen by name; `None` means every variable. Shard manifests record
/// it under `flags.select`.
#[derive(Debug, Clone, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct PairSelection {
    /// Hypothesised drivers to scan.
    #[serde(default)]
    pub drivers: Option<Vec<String>>,
    /// Responses to scan.
    #[serde(default)]
    pub responses: Option<Vec<String>>,
}

/// A selection checked against a table's variable names.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ResolvedSelection {
    /// `driver[i]`: variable `i` may be a driver.
    driver: Vec<bool>,
    /// `response[i]`: variable `i` may be a response.
    response: Vec<bool>,
}

impl PairSelection {
    /// True when every pair is chosen.
    pub fn is_all(&self) -> bool {
        self.drivers.is_none() && self.responses.is_none()
    }

    /// Check the names against `names`; refuses unknown names and a choice with no pair.
    pub fn resolve(&self, names: &[String]) -> Result<ResolvedSelection, String> {
        let mark = |chosen: &Option<Vec<String>>, what: &str| -> Result<Vec<bool>, String> {
            let Some(list) = chosen else {
                return Ok(vec![true; names.len()]);
            };
            let mut out = vec![false; names.len()];
            for name in list {
                let k = names.iter().position(|n| n == name).ok_or_else(|| {
                    format!(
                        "--{what} names `{name}`, which is not a series of the table; its series \
                         are {}",
                        names
                            .iter()
                            .map(|n| format!("`{n}`"))
                            .collect::<Vec<_>>()
                            .join(", ")
                    )
                })?;
                out[k] = true;
            }
            Ok(out)
        };
        let r = ResolvedSelection {
            driver: mark(&self.drivers, "drivers")?,
            response: mark(&self.responses, "responses")?,
        };
        if r.manifolds().is_empty() {
            return Err(
                "the chosen drivers and responses make no ordered pair of two different series; \
                 add a driver or a response"
                    .into(),
            );
        }
        Ok(r)
    }
}

impl ResolvedSelection {
    /// Every pair of `n` variables.
    pub fn all(n: usize) -> Self {
        Self {
            driver: vec![true; n],
            response: vec![true; n],
        }
    }

    /// Whether `driver -> response` is chosen.
    pub fn contains(&self, driver: usize, response: usize) -> bool {
        driver != response && self.driver[driver] && self.response[response]
    }

    /// The chosen ordered pairs, by (driver, response) (quadratic in the variables).
    pub fn pairs(&self) -> Vec<(usize, usize)> {
        let n = self.driver.len();
        (0..n)
            .flat_map(|d| (0..n).map(move |r| (d, r)))
            .filter(|&(d, r)| self.contains(d, r))
            .collect()
    }

    /// The manifolds (response columns) the chosen pairs need, ascending: every variable that
    /// is the driver or the response of a chosen pair. Linear in the variables (a table of
    /// 10,000 columns has 10^8 pairs, too many to list).
    pub fn manifolds(&self) -> Vec<usize> {
        let (nd, nr) = (
            self.driver.iter().filter(|&&b| b).count(),
            self.response.iter().filter(|&&b| b).count(),
        );
        // Another chosen variable than `k` exists on that side.
        let other = |count: usize, side: &[bool], k: usize| count > usize::from(side[k]);
        (0..self.driver.len())
            .filter(|&k| {
                (self.driver[k] && other(nr, &self.response, k))
                    || (self.response[k] && other(nd, &self.driver, k))
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn names() -> Vec<String> {
        ["a", "b", "c", "d", "e"].map(String::from).to_vec()
    }

    #[test]
    fn drivers_against_all_responses() {
        let s = PairSelection {
            drivers: Some(vec!["b".into()]),
            responses: None,
        };
        let r = s.resolve(&names()).unwrap();
        assert_eq!(r.pairs(), [(1, 0), (1, 2), (1, 3), (1, 4)]);
        assert_eq!(r.manifolds(), [0, 1, 2, 3, 4]);
    }

    #[test]
    fn only_the_needed_manifolds() {
        let s = PairSelection {
            drivers: Some(vec!["a".into(), "b".into()]),
            responses: Some(vec!["d".into()]),
        };
        let r = s.resolve(&names()).unwrap();
        assert_eq!(r.pairs(), [(0, 3), (1, 3)]);
        assert_eq!(r.manifolds(), [0, 1, 3]);
        assert!(!r.contains(3, 0));
        // A variable that is both driver and response needs its manifold once.
        let s = PairSelection {
            drivers: Some(vec!["a".into()]),
            responses: Some(vec!["a".into(), "c".into()]),
        };
        let r = s.resolve(&names()).unwrap();
        assert_eq!(r.pairs(), [(0, 2)]);
        assert_eq!(r.manifolds(), [0, 2]);
        // The manifolds are exactly the variables of the chosen pairs.
        let s = PairSelection {
            drivers: Some(vec!["b".into(), "e".into()]),
            responses: Some(vec!["e".into()]),
        };
        let r = s.resolve(&names()).unwrap();
        let mut from_pairs: Vec<usize> = r.pairs().iter().flat_map(|&(d, q)| [d, q]).collect();
        from_pairs.sort_unstable();
        from_pairs.dedup();
        assert_eq!(r.manifolds(), from_pairs);
    }

    #[test]
    fn unknown_names_and_empty_choices_are_refused() {
        let s = PairSelection {
            drivers: Some(vec!["zz".into()]),
            responses: None,
        };
        let e = s.resolve(&names()).unwrap_err();
        assert!(
            e.contains("--drivers") && e.contains("`zz`") && e.contains("`a`"),
            "{e}"
        );
        let s = PairSelection {
            drivers: Some(vec!["a".into()]),
            responses: Some(vec!["a".into()]),
        };
        assert!(s.resolve(&names()).unwrap_err().contains("no ordered pair"));
    }
}
