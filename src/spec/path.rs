//! The paths of `--set` and `tolerances:`: keys and list items (by id) separated by dots, with
//! `[N]` for a list item by position (`loads.radio.draw.tx`, `profile[0].repeat[1].for`).

/// One part of a path: a name or a list index.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Seg<'a> {
    /// A key, or a list item's id.
    Name(&'a str),
    /// A list item by position, from 0 (`[2]`).
    Index(usize),
}

/// `profile[0].repeat[1].for` -> profile, 0, repeat, 1, for.
///
/// # Examples
///
/// ```
/// use joulepath::spec::{Seg, segments};
/// assert_eq!(
///     segments("profile[0].repeat[1].for").unwrap(),
///     [Seg::Name("profile"), Seg::Index(0), Seg::Name("repeat"), Seg::Index(1), Seg::Name("for")]
/// );
/// assert!(segments("loads..x").is_err());
/// assert!(segments("profile[x]").is_err());
/// ```
///
/// # Errors
///
/// What is wrong with the path, in words.
pub fn segments(path: &str) -> Result<Vec<Seg<'_>>, String> {
    let mut out = Vec::new();
    for part in path.split('.') {
        let (name, mut rest) = match part.find('[') {
            Some(k) => (&part[..k], &part[k..]),
            None => (part, ""),
        };
        if name.is_empty() && (out.is_empty() || rest.is_empty()) {
            return Err("the path has an empty part: separate names with single dots".into());
        }
        if !name.is_empty() {
            out.push(Seg::Name(name));
        }
        while !rest.is_empty() {
            let Some(close) = rest.find(']') else {
                return Err(format!("`{part}` has a `[` without its `]`"));
            };
            let n = rest[1..close].trim();
            match n.parse::<usize>() {
                Ok(i) if i < 1_000_000 => out.push(Seg::Index(i)),
                _ => {
                    return Err(format!(
                        "`[{n}]` is not a list index: write a whole number such as `[0]`"
                    ));
                }
            }
            rest = &rest[close + 1..];
            if !rest.is_empty() && !rest.starts_with('[') {
                return Err(format!("`{part}`: a name cannot follow `]` without a dot"));
            }
        }
    }
    Ok(out)
}
