//! Account names.

/// Longest user name: it is written into every `*_by` column and each Idempotency-Key's row.
pub const USER_NAME_MAX: usize = 40;

/// A user name: 2 to [`USER_NAME_MAX`] ASCII letters, digits, dots, dashes or underscores,
/// trimmed. The one rule for the admin page, the command line and the first run.
pub fn parse_user_name(value: &str) -> Result<String, String> {
    let v = value.trim();
    let ok = (2..=USER_NAME_MAX).contains(&v.len())
        && v.chars().all(|c| c.is_ascii_alphanumeric() || matches!(c, '.' | '-' | '_'));
    if ok {
        Ok(v.to_string())
    } else {
        Err(format!("2 to {USER_NAME_MAX} letters, digits, dots, dashes or underscores"))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_follow_one_rule() {
        assert_eq!(parse_user_name(" lead.2 "), Ok("lead.2".to_string()));
        assert_eq!(parse_user_name(&"a".repeat(40)), Ok("a".repeat(40)));
        let rule = Err("2 to 40 letters, digits, dots, dashes or underscores".to_string());
        assert_eq!(parse_user_name(&"a".repeat(41)), rule);
        assert_eq!(parse_user_name(&"a".repeat(199)), rule);
        assert_eq!(parse_user_name("a"), rule);
        assert_eq!(parse_user_name("lead lead"), rule);
    }
}
