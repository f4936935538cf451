//! `--section` rules: which components go into which board section, in place of the section an
//! import takes from each component's sheet. A rule is `PATTERN=NAME`; the pattern is a sheet
//! path (`/alu/`: that sheet and the sheets inside it), a reference (`U12`) or a reference
//! prefix (`U6*`). The most specific rule wins: a reference, then the longest prefix, then the
//! longest sheet path.

use super::netlist::Netlist;

/// What a rule's pattern matches.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Pattern {
    /// Components on this sheet or a sheet inside it ("/alu/"; "/" is every component).
    Sheet(String),
    /// Components whose reference starts with this ("U6" of `U6*`).
    RefPrefix(String),
    /// The component with this reference.
    Reference(String),
}

/// One `--section PATTERN=NAME` rule.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SectionRule {
    /// Which components it takes.
    pub pattern: Pattern,
    /// The section they go into.
    pub section: String,
    /// The rule as given, for messages.
    pub text: String,
}

/// A `--section` rule that cannot be read.
#[derive(Debug, thiserror::Error, PartialEq, Eq)]
pub enum SectionError {
    /// No `=` between pattern and name.
    #[error(
        "--section \"{0}\": expected PATTERN=NAME, a sheet path, a reference or a reference prefix and a section name (e.g. /alu/=far, U12=far, U6*=far)"
    )]
    NoEquals(String),
    /// Nothing before the `=`.
    #[error(
        "--section \"{0}\": the pattern before \"=\" is empty; give a sheet path (/alu/), a reference (U12) or a prefix (U6*)"
    )]
    EmptyPattern(String),
    /// A `*` anywhere but at the end of a reference prefix, or in a sheet path.
    #[error(
        "--section \"{0}\": \"*\" may only end a reference prefix (U6*); a sheet path takes its sub-sheets without one"
    )]
    Star(String),
    /// A section name that is empty or has characters other than letters, digits, `_`, `-`, `.`.
    #[error(
        "--section \"{0}\": the section name \"{1}\" must be letters, digits, \"_\", \"-\" or \".\" (e.g. far)"
    )]
    BadName(String, String),
    /// The same pattern given twice.
    #[error("--section \"{0}\": its pattern was given before (\"{1}\"); give each pattern once")]
    Twice(String, String),
}

impl SectionRule {
    /// Read one rule, `PATTERN=NAME`.
    pub fn parse(arg: &str) -> Result<SectionRule, SectionError> {
        let Some((pattern, name)) = arg.split_once('=') else {
            return Err(SectionError::NoEquals(arg.into()));
        };
        let (pattern, name) = (pattern.trim(), name.trim());
        if pattern.is_empty() {
            return Err(SectionError::EmptyPattern(arg.into()));
        }
        if name.is_empty()
            || !name
                .chars()
                .all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.'))
        {
            return Err(SectionError::BadName(arg.into(), name.into()));
        }
        let pattern = if pattern.starts_with('/') {
            if pattern.contains('*') {
                return Err(SectionError::Star(arg.into()));
            }
            let mut p = pattern.to_string();
            if !p.ends_with('/') {
                p.push('/');
            }
            Pattern::Sheet(p)
        } else if let Some(prefix) = pattern.strip_suffix('*') {
            if prefix.is_empty() || prefix.contains('*') {
                return Err(SectionError::Star(arg.into()));
            }
            Pattern::RefPrefix(prefix.into())
        } else if pattern.contains('*') {
            return Err(SectionError::Star(arg.into()));
        } else {
            Pattern::Reference(pattern.into())
        };
        Ok(SectionRule {
            pattern,
            section: name.into(),
            text: arg.into(),
        })
    }

    /// Read every rule; a pattern given twice is an error.
    pub fn parse_all<S: AsRef<str>>(args: &[S]) -> Result<Vec<SectionRule>, SectionError> {
        let mut rules: Vec<SectionRule> = Vec::new();
        for a in args {
            let r = SectionRule::parse(a.as_ref())?;
            if let Some(before) = rules.iter().find(|x| x.pattern == r.pattern) {
                return Err(SectionError::Twice(r.text, before.text.clone()));
            }
            rules.push(r);
        }
        Ok(rules)
    }

    /// How specifically the rule matches a component (None: not at all); higher wins.
    fn rank(&self, reference: &str, sheet: &str) -> Option<(u8, usize)> {
        match &self.pattern {
            Pattern::Reference(r) => (r == reference).then_some((2, r.len())),
            Pattern::RefPrefix(p) => reference.starts_with(p.as_str()).then_some((1, p.len())),
            Pattern::Sheet(s) => {
                let mut on = sheet.to_string();
                if !on.ends_with('/') {
                    on.push('/');
                }
                on.starts_with(s.as_str()).then_some((0, s.len()))
            }
        }
    }
}

/// The section the rules give a component, if one matches (the most specific rule).
pub fn section_for<'a>(rules: &'a [SectionRule], reference: &str, sheet: &str) -> Option<&'a str> {
    rules
        .iter()
        .filter_map(|r| r.rank(reference, sheet).map(|k| (k, r)))
        .max_by_key(|(k, _)| *k)
        .map(|(_, r)| r.section.as_str())
}

/// The rules that match no component of the netlist (a misspelt sheet or reference).
pub fn unmatched<'a>(rules: &'a [SectionRule], net: &Netlist) -> Vec<&'a SectionRule> {
    rules
        .iter()
        .filter(|r| {
            !net.components
                .iter()
                .any(|c| r.rank(&c.reference, &c.sheet).is_some())
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rules(a: &[&str]) -> Vec<SectionRule> {
        SectionRule::parse_all(a).unwrap()
    }

    #[test]
    fn the_most_specific_rule_wins() {
        let r = rules(&["/=near", "/cpu/=mid", "/cpu/alu=far", "U4*=mid", "U41=near"]);
        assert_eq!(section_for(&r, "U7", "/"), Some("near"));
        assert_eq!(section_for(&r, "U7", "/cpu/"), Some("mid"));
        assert_eq!(section_for(&r, "U7", "/cpu/alu/"), Some("far"));
        assert_eq!(section_for(&r, "U7", "/cpu/alu/carry/"), Some("far"));
        assert_eq!(section_for(&r, "U7", "/cpu/aluminium/"), Some("mid"));
        assert_eq!(section_for(&r, "U40", "/cpu/alu/"), Some("mid"));
        assert_eq!(section_for(&r, "U41", "/cpu/alu/"), Some("near"));
        assert_eq!(section_for(&rules(&["/alu/=far"]), "U1", "/"), None);
    }

    #[test]
    fn bad_rules_say_what_is_wrong() {
        let e = |a: &str| SectionRule::parse(a).unwrap_err();
        assert_eq!(e("/alu/"), SectionError::NoEquals("/alu/".into()));
        assert_eq!(e("=far"), SectionError::EmptyPattern("=far".into()));
        assert_eq!(
            e("/alu/=far side"),
            SectionError::BadName("/alu/=far side".into(), "far side".into())
        );
        assert_eq!(
            e("/alu/="),
            SectionError::BadName("/alu/=".into(), "".into())
        );
        assert_eq!(e("U*4=far"), SectionError::Star("U*4=far".into()));
        assert_eq!(e("/a*/=far"), SectionError::Star("/a*/=far".into()));
        assert_eq!(e("*=far"), SectionError::Star("*=far".into()));
        let twice = SectionRule::parse_all(&["/alu=far", "/alu/=near"]).unwrap_err();
        assert_eq!(
            twice,
            SectionError::Twice("/alu/=near".into(), "/alu=far".into())
        );
        assert!(
            twice.to_string().contains("given before (\"/alu=far\")"),
            "{twice}"
        );
    }
}
