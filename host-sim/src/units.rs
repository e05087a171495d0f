//! US customary pond files: keys carry their unit in a suffix (`_ft`, `_cfs`, …); at load the
//! keys are renamed to the SI suffix and the numbers converted, once, before anything else
//! reads them.
//!
//! Factors are exact by definition (1 ft = 0.3048 m, 1 in = 25.4 mm, 1 acre = 4046.856 422 4 m²
//! = 0.404 685 642 24 ha; NIST SP 811, appendix B).

use toml::Value;

/// m per ft (exact).
pub const M_PER_FT: f64 = 0.3048;
/// mm per in (exact).
pub const MM_PER_IN: f64 = 25.4;
/// ha per acre (exact).
pub const HA_PER_ACRE: f64 = 0.404_685_642_24;

/// One suffix rule: the US suffix, the SI suffix it becomes, and the factor per column
/// (one factor for plain numbers; two for `[stage, x]` rows).
struct Rule {
    us: &'static str,
    si: &'static str,
    factors: &'static [f64],
}

const FT2: f64 = M_PER_FT * M_PER_FT;
const FT3: f64 = M_PER_FT * M_PER_FT * M_PER_FT;

/// Longest suffix first, so `_ft_ft2` wins over `_ft2`.
const RULES: &[Rule] = &[
    Rule {
        us: "_ft_ft2",
        si: "_m_m2",
        factors: &[M_PER_FT, FT2],
    },
    Rule {
        us: "_ft_ft3",
        si: "_m_m3",
        factors: &[M_PER_FT, FT3],
    },
    Rule {
        us: "_ft_ft",
        si: "_m_m",
        factors: &[1.0],
    },
    Rule {
        us: "_acres",
        si: "_ha",
        factors: &[HA_PER_ACRE],
    },
    Rule {
        us: "_ft_s",
        si: "_m_s",
        factors: &[M_PER_FT],
    },
    Rule {
        us: "_in_h",
        si: "_mm_h",
        factors: &[MM_PER_IN],
    },
    Rule {
        us: "_cfs",
        si: "_m3s",
        factors: &[FT3],
    },
    Rule {
        us: "_ft2",
        si: "_m2",
        factors: &[FT2],
    },
    Rule {
        us: "_ft3",
        si: "_m3",
        factors: &[FT3],
    },
    Rule {
        us: "_ft",
        si: "_m",
        factors: &[M_PER_FT],
    },
    Rule {
        us: "_in",
        si: "_mm",
        factors: &[MM_PER_IN],
    },
];

/// SI suffixes that must not appear in a US file (they would be read unconverted).
const SI_SUFFIXES: &[&str] = &[
    "_m", "_m2", "_m3", "_m3s", "_ha", "_mm", "_mm_h", "_m_s", "_m_m", "_m_m2", "_m_m3",
];

/// A key renamed at load: where it is in the file and what it became.
#[derive(Debug, Clone, PartialEq)]
pub struct Renamed {
    /// Dotted path with the SI key (as errors name it).
    pub si_path: String,
    /// The key as written in the file.
    pub us_key: String,
    /// SI value = US value × factor (first column for rows).
    pub factor: f64,
}

fn scale(v: &mut Value, factors: &[f64], path: &str) -> Result<(), String> {
    match v {
        Value::Float(f) => {
            *f *= factors.first().copied().unwrap_or(1.0);
            Ok(())
        }
        Value::Integer(i) => {
            *v = Value::Float(*i as f64 * factors.first().copied().unwrap_or(1.0));
            Ok(())
        }
        Value::Array(items) => {
            // A row [stage, x] with two factors; otherwise the same factor everywhere.
            let is_row = factors.len() > 1 && items.iter().all(|i| !i.is_array());
            for (k, item) in items.iter_mut().enumerate() {
                if is_row {
                    let f = factors.get(k).copied().unwrap_or(1.0);
                    scale(item, &[f], path)?;
                } else {
                    scale(item, factors, path)?;
                }
            }
            Ok(())
        }
        _ => Err(format!("{path}: expected a number or a list of numbers")),
    }
}

/// Converts a US file's tree in place; returns what was renamed.
pub fn us_to_si(root: &mut Value) -> Result<Vec<Renamed>, String> {
    let mut out = Vec::new();
    walk(root, "", &mut out)?;
    Ok(out)
}

fn walk(v: &mut Value, path: &str, out: &mut Vec<Renamed>) -> Result<(), String> {
    match v {
        Value::Table(t) => {
            let keys: Vec<String> = t.keys().cloned().collect();
            for k in keys {
                let here = if path.is_empty() {
                    k.clone()
                } else {
                    format!("{path}.{k}")
                };
                if let Some(si) = SI_SUFFIXES.iter().find(|s| k.ends_with(**s)) {
                    let rule = RULES.iter().find(|r| r.si == *si);
                    let hint = rule.map_or(String::new(), |r| {
                        format!(" (write {}{})", k.trim_end_matches(si), r.us)
                    });
                    return Err(format!(
                        "{here}: an SI key in a file with units = \"us\"{hint}"
                    ));
                }
                if let Some(rule) = RULES.iter().find(|r| k.ends_with(r.us)) {
                    let Some(mut val) = t.remove(&k) else {
                        continue;
                    };
                    scale(&mut val, rule.factors, &here)?;
                    let new_key = format!("{}{}", k.trim_end_matches(rule.us), rule.si);
                    let si_path = if path.is_empty() {
                        new_key.clone()
                    } else {
                        format!("{path}.{new_key}")
                    };
                    out.push(Renamed {
                        si_path,
                        us_key: here,
                        factor: rule.factors.first().copied().unwrap_or(1.0),
                    });
                    t.insert(new_key, val);
                } else if let Some(child) = t.get_mut(&k) {
                    walk(child, &here, out)?;
                }
            }
            Ok(())
        }
        Value::Array(items) => {
            for (i, item) in items.iter_mut().enumerate() {
                walk(item, &format!("{path}[{i}]"), out)?;
            }
            Ok(())
        }
        _ => Ok(()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 1 ft = 0.3048 m and 1 cfs = 0.028 316 846 592 m³/s exactly (NIST SP 811, appendix B).
    #[test]
    fn keys_are_renamed_and_values_converted() {
        let mut v: Value = toml::from_str(
            "[gate]\nwidth_ft = 2.0\n[permit]\nrelease_cfs = 10\n[s]\nstage_area_ft_ft2 = [[1.0, 100.0]]\n",
        )
        .unwrap();
        let r = us_to_si(&mut v).unwrap();
        assert_eq!(r.len(), 3);
        assert!((v["gate"]["width_m"].as_float().unwrap() - 0.6096).abs() < 1e-12);
        assert!((v["permit"]["release_m3s"].as_float().unwrap() - 0.283_168_465_92).abs() < 1e-12);
        let row = &v["s"]["stage_area_m_m2"][0];
        assert!((row[1].as_float().unwrap() - 9.290_304).abs() < 1e-9);
    }

    #[test]
    fn si_keys_in_a_us_file_are_refused() {
        let mut v: Value = toml::from_str("[gate]\nwidth_m = 2.0\n").unwrap();
        let e = us_to_si(&mut v).unwrap_err();
        assert!(e.contains("gate.width_m") && e.contains("width_ft"), "{e}");
    }
}
