//! A list of named entries (algorithm kinds, model families): the built-in ones, then those a
//! program linking kiln registers at run time, in registration order. Names are unique.

use std::sync::RwLock;

/// An entry that has a name.
pub trait Named: Copy + 'static {
    fn name(&self) -> &'static str;
}

/// The built-in entries and the ones registered at run time.
pub struct Registry<T: Named> {
    builtin: &'static [T],
    /// How an entry is called in messages ("an algorithm kind", "a family").
    what: &'static str,
    extra: RwLock<Vec<T>>,
}

impl<T: Named> Registry<T> {
    pub const fn new(builtin: &'static [T], what: &'static str) -> Self {
        Registry {
            builtin,
            what,
            extra: RwLock::new(Vec::new()),
        }
    }

    /// Adds an entry for this process. Refused when its name is taken.
    pub fn register(&self, entry: T) -> Result<(), String> {
        let mut extra = self.extra.write().unwrap_or_else(|e| e.into_inner());
        if self
            .builtin
            .iter()
            .chain(extra.iter())
            .any(|e| e.name() == entry.name())
        {
            return Err(format!(
                "{} `{}` is already registered",
                self.what,
                entry.name()
            ));
        }
        extra.push(entry);
        Ok(())
    }

    /// The built-in entries, in list order.
    pub fn builtin(&self) -> &'static [T] {
        self.builtin
    }

    /// Every entry: the built-in list, then the registered ones.
    pub fn all(&self) -> Vec<T> {
        let extra = self.extra.read().unwrap_or_else(|e| e.into_inner());
        self.builtin.iter().chain(extra.iter()).copied().collect()
    }

    /// The entry named `name`, if any.
    pub fn find(&self, name: &str) -> Option<T> {
        self.all().into_iter().find(|e| e.name() == name)
    }

    /// Every entry's name, in list order.
    pub fn names(&self) -> Vec<&'static str> {
        self.all().iter().map(|e| e.name()).collect()
    }
}
