//! Production zones: the places a pilot instruments, and their lifecycle.

use super::{FieldErrors, optional_text, required_text};
use serde::{Deserialize, Serialize};

/// Where a zone stands in the programme. Words of our own, in lifecycle order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ZoneStatus {
    /// Scored, not yet chosen.
    Candidate,
    /// Business case approved, pilot not started.
    Approved,
    /// Sensors and analytics being installed.
    Piloting,
    /// Live; the controller books measured savings.
    Measuring,
    /// Measurement finished.
    Closed,
    /// Set aside; never selected.
    Shelved,
}

impl ZoneStatus {
    /// Every status, in lifecycle order (for select boxes).
    pub const ALL: [ZoneStatus; 6] =
        [Self::Candidate, Self::Approved, Self::Piloting, Self::Measuring, Self::Closed, Self::Shelved];

    /// The stored and serialized spelling.
    pub fn as_str(self) -> &'static str {
        match self {
            Self::Candidate => "candidate",
            Self::Approved => "approved",
            Self::Piloting => "piloting",
            Self::Measuring => "measuring",
            Self::Closed => "closed",
            Self::Shelved => "shelved",
        }
    }

    /// Parse the stored spelling.
    pub fn parse(value: &str) -> Result<Self, String> {
        Self::ALL
            .into_iter()
            .find(|s| s.as_str() == value.trim())
            .ok_or_else(|| "one of candidate, approved, piloting, measuring, closed, shelved".to_string())
    }

    /// The states a zone may move to from this one. The lifecycle only moves forward; a zone
    /// may be shelved until it closes, and a shelved zone may become a candidate again only
    /// while no money is booked on it (see [`ZoneStatus::check_move`]).
    pub fn next(self) -> &'static [ZoneStatus] {
        match self {
            Self::Candidate => &[Self::Approved, Self::Shelved],
            Self::Approved => &[Self::Piloting, Self::Shelved],
            Self::Piloting => &[Self::Measuring, Self::Shelved],
            Self::Measuring => &[Self::Closed, Self::Shelved],
            Self::Closed => &[],
            Self::Shelved => &[Self::Candidate],
        }
    }

    /// Whether money may be booked on a zone in this state: while approved, piloting or
    /// measuring. A candidate or shelved zone is not under way, a closed one has finished
    /// (its entries can still be reversed).
    pub fn check_booking(self) -> Result<(), String> {
        match self {
            Self::Approved | Self::Piloting | Self::Measuring => Ok(()),
            _ => Err(format!(
                "the zone is {self}: money is booked only while a zone is approved, piloting or measuring; nothing \
                 was booked"
            )),
        }
    }

    /// Whether the zone may move from this state to `to`: `booked` says whether any money is
    /// booked on it, `baseline` whether it has an approved business case. Staying is allowed.
    /// A zone with booked money or an approved baseline never returns to candidate.
    pub fn check_move(self, to: ZoneStatus, booked: bool, baseline: bool) -> Result<(), String> {
        if self == to {
            return Ok(());
        }
        let allowed = self
            .next()
            .iter()
            .filter(|s| !(**s == Self::Candidate && (booked || baseline)))
            .copied()
            .collect::<Vec<_>>();
        let list = if allowed.is_empty() {
            "none".to_string()
        } else {
            allowed.iter().map(|s| s.as_str()).collect::<Vec<_>>().join(", ")
        };
        if !allowed.contains(&to) {
            let why = if to == Self::Candidate && booked {
                " (money is booked on this zone, so it never returns to candidate)"
            } else if to == Self::Candidate && baseline && self.next().contains(&Self::Candidate) {
                " (the zone has an approved baseline, so it never returns to candidate)"
            } else {
                ""
            };
            return Err(format!("a zone cannot move from {self} to {to}{why}; allowed next states: {list}"));
        }
        if to == Self::Approved && !baseline {
            return Err(format!(
                "a zone becomes approved with its business case: approve a case version first; allowed next states: {list}"
            ));
        }
        Ok(())
    }
}

impl std::fmt::Display for ZoneStatus {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.as_str())
    }
}

/// Raw zone fields as a form or JSON body sends them.
#[derive(Debug, Clone, Default, Deserialize, Serialize)]
#[serde(default)]
pub struct ZoneInput {
    /// Short unique code, e.g. `PRESS-2`.
    pub code: String,
    /// Display name.
    pub name: String,
    /// Free text.
    pub description: String,
    /// Who answers for the zone (a role or team, not personal data about operators).
    pub owner: String,
    /// Lifecycle status; empty means candidate.
    pub status: String,
    /// Area of the plant; empty for none.
    pub area: String,
    /// Codes of the zones that must be live first (the zone form sends them comma-separated,
    /// see [`ZoneInput::split_needs`]).
    pub needs: Vec<String>,
}

impl ZoneInput {
    /// The needs as the zone form's one text field shows them.
    pub fn needs_text(&self) -> String {
        self.needs.join(", ")
    }

    /// The needs of the zone form's one text field: codes separated by commas.
    pub fn split_needs(text: &str) -> Vec<String> {
        text.split(',').map(str::trim).filter(|c| !c.is_empty()).map(str::to_string).collect()
    }
}

/// At most this many needs per zone: a roadmap's dependencies are few, and every need is one
/// more precedence row for the solver.
pub const MAX_NEEDS: usize = 20;

/// Longest area name, in characters.
pub const MAX_AREA_CHARS: usize = 60;

/// A valid zone, ready to store.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NewZone {
    /// Upper-case code of letters, digits and dashes.
    pub code: String,
    /// Display name.
    pub name: String,
    /// Free text.
    pub description: String,
    /// Owner.
    pub owner: String,
    /// Lifecycle status.
    pub status: ZoneStatus,
    /// Area of the plant, trimmed; empty for none.
    pub area: String,
    /// Codes of the zones it needs live first: upper-cased, sorted, each once, never its own.
    /// Whether they name stored zones (and make no cycle) is checked where they are stored.
    pub needs: Vec<String>,
}

impl NewZone {
    /// Validate every field, collecting all errors.
    pub fn parse(input: &ZoneInput) -> Result<Self, FieldErrors> {
        let mut errors = FieldErrors::default();
        let code = errors.take("code", parse_code(&input.code));
        let name = errors.take("name", required_text(&input.name, 120));
        let description = errors.take("description", optional_text(&input.description, 2000));
        let owner = errors.take("owner", optional_text(&input.owner, 120));
        let area = errors.take("area", optional_text(&input.area, MAX_AREA_CHARS));
        let needs = errors.take("needs", parse_needs(&input.needs, code.as_deref()));
        let status = if input.status.trim().is_empty() {
            Some(ZoneStatus::Candidate)
        } else {
            errors.take("status", ZoneStatus::parse(&input.status))
        };
        match (code, name, description, owner, status, area, needs) {
            (Some(code), Some(name), Some(description), Some(owner), Some(status), Some(area), Some(needs))
                if errors.is_empty() =>
            {
                Ok(Self { code, name, description, owner, status, area, needs })
            }
            _ => Err(errors),
        }
    }
}

impl NewZone {
    /// [`NewZone::parse`] for a zone created by a page or the API: it starts as a candidate (or
    /// shelved); later states come through the lifecycle. Scenario files may load any state.
    pub fn parse_new(input: &ZoneInput) -> Result<Self, FieldErrors> {
        let zone = Self::parse(input)?;
        match zone.status {
            ZoneStatus::Candidate | ZoneStatus::Shelved => Ok(zone),
            other => Err(FieldErrors::one(
                "status",
                format!("a new zone starts as candidate or shelved, not {other}: later states follow its lifecycle"),
            )),
        }
    }
}

/// The needs as codes: each a zone code (upper-cased), each once, sorted; not `own` (the zone's
/// own code, when it is valid).
fn parse_needs(values: &[String], own: Option<&str>) -> Result<Vec<String>, String> {
    let mut codes = std::collections::BTreeSet::new();
    for value in values {
        let code = parse_code(value).map_err(|_| {
            format!("{:?} is not a zone code (1 to 16 letters, digits or dashes, e.g. PRESS-2)", value.trim())
        })?;
        if Some(code.as_str()) == own {
            return Err(format!("{code} cannot need itself"));
        }
        codes.insert(code);
    }
    if codes.len() > MAX_NEEDS {
        return Err(format!("at most {MAX_NEEDS} zones (MAX_NEEDS); {} given", codes.len()));
    }
    Ok(codes.into_iter().collect())
}

fn parse_code(value: &str) -> Result<String, String> {
    let code = value.trim().to_uppercase();
    let ok = (1..=16).contains(&code.len())
        && code.chars().all(|c| c.is_ascii_uppercase() || c.is_ascii_digit() || c == '-');
    if ok { Ok(code) } else { Err("1 to 16 letters, digits or dashes, e.g. PRESS-2".into()) }
}

/// The shortest chain of needs that would lead from `zone` back to itself if it needed
/// `needs`, given the other zones' needs (`needs_of`: zone -> the zones it needs, its own
/// entry ignored): `[zone, a, .., zone]`, or `None` when the needs stay free of cycles. The
/// stored needs are free of cycles, so a new cycle passes through `zone`; a breadth-first
/// search from its needs finds the shortest one.
pub fn cycle_through<K: Copy + Eq + std::hash::Hash + Ord>(
    zone: K,
    needs: &[K],
    needs_of: &std::collections::HashMap<K, Vec<K>>,
) -> Option<Vec<K>> {
    use std::collections::{HashMap, VecDeque};
    let mut came_from: HashMap<K, K> = HashMap::new();
    let mut queue: VecDeque<K> = VecDeque::new();
    let mut first: Vec<K> = needs.to_vec();
    first.sort();
    for n in first {
        if n == zone {
            return Some(vec![zone, zone]);
        }
        if came_from.insert(n, zone).is_none() {
            queue.push_back(n);
        }
    }
    while let Some(at) = queue.pop_front() {
        let mut next = needs_of.get(&at).cloned().unwrap_or_default();
        next.sort();
        for n in next {
            if n == zone {
                // Walk back from `at` to `zone`, then read the chain forwards.
                let mut back = vec![at];
                let mut k = at;
                while let Some(&p) = came_from.get(&k) {
                    if p == zone {
                        break;
                    }
                    back.push(p);
                    k = p;
                }
                let mut chain = vec![zone];
                chain.extend(back.into_iter().rev());
                chain.push(zone);
                return Some(chain);
            }
            if let std::collections::hash_map::Entry::Vacant(e) = came_from.entry(n) {
                e.insert(at);
                queue.push_back(n);
            }
        }
    }
    None
}

/// The refusal of a cycle of needs, by code: `chain` is `[zone, a, .., zone]`.
pub fn cycle_message(chain: &[&str]) -> String {
    let members = &chain[..chain.len().saturating_sub(1)];
    match members {
        [a] => format!("{a} cannot need itself"),
        [a, b] => format!("{a} and {b} would need each other"),
        _ => {
            let (last, rest) = members.split_last().map_or(("", &[][..]), |(l, r)| (*l, r));
            let steps: Vec<String> = chain.windows(2).map(|w| format!("{} needs {}", w[0], w[1])).collect();
            format!("{} and {last} would need each other in a circle: {}", rest.join(", "), steps.join(", "))
        }
    }
}

/// A stored zone.
#[derive(Debug, Clone, Serialize)]
pub struct Zone {
    /// Row id.
    pub id: i64,
    /// Unique code.
    pub code: String,
    /// Display name.
    pub name: String,
    /// Free text.
    pub description: String,
    /// Owner.
    pub owner: String,
    /// Lifecycle status.
    pub status: ZoneStatus,
    /// RFC 3339 creation time.
    pub created_at: String,
    /// Who created it.
    pub created_by: String,
    /// RFC 3339 time of the last change.
    pub updated_at: String,
    /// Who changed it last.
    pub updated_by: String,
    /// Area of the plant (e.g. press shop); empty for none. One introduction at a time per area.
    pub area: String,
    /// Codes of the zones that must be live before this one starts, by code.
    pub needs: Vec<String>,
}

impl Zone {
    /// The raw fields this zone parses back from (a scenario file's zone, a form's defaults).
    pub fn input(&self) -> ZoneInput {
        ZoneInput {
            code: self.code.clone(),
            name: self.name.clone(),
            description: self.description.clone(),
            owner: self.owner.clone(),
            status: self.status.as_str().to_string(),
            area: self.area.clone(),
            needs: self.needs.clone(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_bad_field_is_named() {
        let input =
            ZoneInput { code: "no spaces!".into(), name: " ".into(), status: "busy".into(), ..Default::default() };
        let errors = NewZone::parse(&input).err().unwrap_or_default();
        let fields: Vec<&str> = errors.0.iter().map(|e| e.field.as_str()).collect();
        assert_eq!(fields, ["code", "name", "status"]);
    }

    #[test]
    fn the_lifecycle_only_moves_forward() {
        use ZoneStatus::*;
        assert_eq!(Candidate.check_move(Approved, false, true), Ok(()));
        assert_eq!(
            Measuring.check_move(Candidate, false, true),
            Err("a zone cannot move from measuring to candidate; allowed next states: closed, shelved".into())
        );
        assert_eq!(Shelved.check_move(Candidate, false, false), Ok(()));
        assert_eq!(
            Shelved.check_move(Candidate, false, true),
            Err("a zone cannot move from shelved to candidate (the zone has an approved baseline, so it never returns to candidate); allowed next states: none".into())
        );
        assert!(
            Approved.check_booking().is_ok() && Piloting.check_booking().is_ok() && Measuring.check_booking().is_ok()
        );
        assert_eq!(
            Closed.check_booking(),
            Err("the zone is closed: money is booked only while a zone is approved, piloting or measuring; nothing was booked".into())
        );
        assert!(Candidate.check_booking().is_err() && Shelved.check_booking().is_err());
        assert_eq!(
            Shelved.check_move(Candidate, true, true),
            Err("a zone cannot move from shelved to candidate (money is booked on this zone, so it never returns to candidate); allowed next states: none".into())
        );
        assert!(Candidate.check_move(Approved, false, false).is_err());
        assert_eq!(Closed.check_move(Closed, true, true), Ok(()));
    }

    #[test]
    fn code_is_upper_cased() {
        let input = ZoneInput { code: "weld-1".into(), name: "Weld cell".into(), ..Default::default() };
        let zone = NewZone::parse(&input).map(|z| z.code);
        assert_eq!(zone, Ok("WELD-1".to_string()));
    }

    #[test]
    fn area_and_needs_are_read_and_checked() -> Result<(), FieldErrors> {
        let input = ZoneInput {
            code: "paint-1".into(),
            name: "Paint line".into(),
            area: "  paint shop ".into(),
            needs: ZoneInput::split_needs(" press-2, PRESS-1,,press-2 "),
            ..Default::default()
        };
        let zone = NewZone::parse(&input)?;
        // Trimmed; codes upper-cased, each once, sorted.
        assert_eq!((zone.area.as_str(), zone.needs), ("paint shop", vec!["PRESS-1".to_string(), "PRESS-2".into()]));
        let long = ZoneInput { area: "a".repeat(61), ..input.clone() };
        assert_eq!(NewZone::parse(&long).err().unwrap_or_default().get("area"), Some("at most 60 characters"));
        // Positive control at the bound.
        assert!(NewZone::parse(&ZoneInput { area: "a".repeat(60), ..input.clone() }).is_ok());
        let own = ZoneInput { needs: vec!["Paint-1".into()], ..input.clone() };
        assert_eq!(NewZone::parse(&own).err().unwrap_or_default().get("needs"), Some("PAINT-1 cannot need itself"));
        let bad = ZoneInput { needs: vec!["press 2".into()], ..input };
        assert_eq!(
            NewZone::parse(&bad).err().unwrap_or_default().get("needs"),
            Some("\"press 2\" is not a zone code (1 to 16 letters, digits or dashes, e.g. PRESS-2)")
        );
        Ok(())
    }

    #[test]
    fn a_cycle_is_found_and_named() {
        use std::collections::HashMap;
        // 2 needs 3, 3 needs 4; 5 needs nothing.
        let needs_of: HashMap<u8, Vec<u8>> = [(2, vec![3]), (3, vec![4])].into_iter().collect();
        assert_eq!(cycle_through(4, &[5], &needs_of), None);
        assert_eq!(cycle_through(4, &[2], &needs_of), Some(vec![4, 2, 3, 4]));
        assert_eq!(cycle_through(3, &[2], &needs_of), Some(vec![3, 2, 3]));
        // The shortest cycle when two close: 4 -> 3 -> 4 beats 4 -> 2 -> 3 -> 4.
        assert_eq!(cycle_through(4, &[2, 3], &needs_of), Some(vec![4, 3, 4]));
        assert_eq!(cycle_message(&["PRESS-2", "PAINT-1", "PRESS-2"]), "PRESS-2 and PAINT-1 would need each other");
        assert_eq!(
            cycle_message(&["A-1", "B-1", "C-1", "A-1"]),
            "A-1, B-1 and C-1 would need each other in a circle: A-1 needs B-1, B-1 needs C-1, C-1 needs A-1"
        );
    }
}
