//! Building a circuit through the Rust API: named nodes, named elements and their pins.

use crate::element::Element;
use foldhash::fast::FixedState;
use hashbrown::hash_table::Entry;
use hashbrown::HashTable;
use std::fmt;
use std::hash::BuildHasher;
use std::sync::Arc;

/// A node of a [`Circuit`]. [`Circuit::GROUND`] is the reference node at 0 V.
///
/// Four bytes: a circuit holds one per element terminal. The last value is not a node (see
/// [`Circuit::node`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct NodeId(pub(crate) u32);

impl NodeId {
    /// Whether this is the ground node.
    pub fn is_ground(self) -> bool {
        self.0 == 0
    }
}

/// An element of a [`Circuit`], in the order elements were added.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct ElementId(pub(crate) usize);

impl ElementId {
    /// Position of the element in insertion order.
    pub fn index(self) -> usize {
        self.0
    }
}

/// Why an element could not be added.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum CircuitError {
    /// Another element already has this name.
    DuplicateElement(String),
    /// The element was given the wrong number of pins.
    PinCount {
        /// The element's name.
        element: String,
        /// How many terminals the element has.
        expected: usize,
        /// How many nodes were given.
        found: usize,
    },
    /// A node id that does not belong to this circuit.
    ForeignNode(String),
    /// A node past the most a circuit can number (`u32::MAX - 1` besides ground).
    TooManyNodes(String),
}

impl fmt::Display for CircuitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CircuitError::DuplicateElement(name) => write!(f, "element `{name}` is defined twice"),
            CircuitError::PinCount {
                element,
                expected,
                found,
            } => {
                write!(
                    f,
                    "element `{element}` has {expected} terminals but {found} nodes were given"
                )
            }
            CircuitError::ForeignNode(element) => {
                write!(f, "element `{element}` refers to a node of another circuit")
            }
            CircuitError::TooManyNodes(element) => write!(
                f,
                "element `{element}` refers to a node past the {} nodes a circuit can hold; \
                 split the circuit",
                u32::MAX - 1
            ),
        }
    }
}

impl std::error::Error for CircuitError {}

/// Names kept in one buffer, found by name in constant time: a circuit of a million elements
/// costs no allocation per name, and freeing it none either. The hash is seeded with a
/// constant, so nothing depends on the process (names are the user's own, not untrusted
/// input: a file crafted for collisions could only slow its own build).
#[derive(Clone, Default)]
pub(crate) struct Names {
    text: String,
    /// Where each name ends in `text`.
    ends: Vec<usize>,
    /// Each name's index: four bytes a name, so that a million names' table stays in cache
    /// (growing it hashes the names again; [`Circuit::reserve`] sizes it once). Names past
    /// `u32::MAX` are kept but not indexed: they are not found and their repeats not caught,
    /// and the compile refuses such a circuit as too large.
    index: HashTable<u32>,
}

impl Names {
    fn hash(name: &str) -> u64 {
        FixedState::with_seed(0).hash_one(name)
    }

    /// The `i`-th name.
    pub(crate) fn get(&self, i: usize) -> &str {
        name_at(&self.text, &self.ends, i)
    }

    /// How many names there are.
    pub(crate) fn len(&self) -> usize {
        self.ends.len()
    }

    /// The index of `name`, if it is there.
    pub(crate) fn find(&self, name: &str) -> Option<usize> {
        self.find_hashed(name, Self::hash(name))
    }

    fn find_hashed(&self, name: &str, hash: u64) -> Option<usize> {
        self.index
            .find(hash, |&i| self.get(i as usize) == name)
            .map(|&i| i as usize)
    }

    /// Adds `name` and returns its index, or the index it already has as the error (one
    /// probe of the index finds a repeat and the new name's place).
    pub(crate) fn push(&mut self, name: &str) -> Result<usize, usize> {
        let hash = Self::hash(name);
        let i = self.ends.len();
        let Names { text, ends, index } = self;
        // Names past u32::MAX go unindexed: a circuit that large is refused when compiled.
        let Ok(k) = u32::try_from(i) else {
            if let Some(found) = self.find_hashed(name, hash) {
                return Err(found);
            }
            self.text.push_str(name);
            self.ends.push(self.text.len());
            return Ok(i);
        };
        let entry = index.entry(
            hash,
            |&j| name_at(text, ends, j as usize) == name,
            |&j| Self::hash(name_at(text, ends, j as usize)),
        );
        match entry {
            Entry::Occupied(found) => Err(*found.get() as usize),
            Entry::Vacant(slot) => {
                slot.insert(k);
                text.push_str(name);
                ends.push(text.len());
                Ok(i)
            }
        }
    }

    /// Room for `more` names of about `bytes` bytes each.
    fn reserve(&mut self, more: usize, bytes: usize) {
        self.text.reserve(more.saturating_mul(bytes));
        self.ends.reserve(more);
        let Names { text, ends, index } = self;
        index.reserve(more, |&k| Self::hash(name_at(text, ends, k as usize)));
    }
}

/// The id of node number `i`: `u32::MAX` for every node past the last that fits.
pub(crate) fn node_id(i: usize) -> NodeId {
    NodeId(u32::try_from(i).unwrap_or(u32::MAX))
}

/// The `i`-th of the names ending at `ends` in `text`.
fn name_at<'a>(text: &'a str, ends: &[usize], i: usize) -> &'a str {
    let start = if i == 0 { 0 } else { ends[i - 1] };
    &text[start..ends[i]]
}

/// A flat circuit: nodes by name and elements with their pins.
///
/// ```
/// use lamina_engine::{Circuit, elements::{Resistor, VoltageSource}};
/// let mut c = Circuit::new();
/// let a = c.node("a");
/// c.add("supply", VoltageSource::dc(1.0), &[a, Circuit::GROUND]).unwrap();
/// c.add("load", Resistor::new(1e3), &[a, Circuit::GROUND]).unwrap();
/// assert_eq!(c.node_count(), 2);
/// ```
pub struct Circuit {
    pub(crate) node_names: Names,
    /// Elements may share one model (see [`Circuit::add_shared`]); an analysis that changes
    /// one (a sweep's source) copies it first.
    pub(crate) elements: Vec<Arc<dyn Element>>,
    pub(crate) element_names: Names,
    /// Every element's pins in one list; element `e`'s are `pins[pin_start[e]..pin_start[e + 1]]`.
    pub(crate) pins: Vec<NodeId>,
    pub(crate) pin_start: Vec<usize>,
}

impl Default for Circuit {
    fn default() -> Self {
        Self::new()
    }
}

impl Circuit {
    /// The reference node, named `ground`.
    pub const GROUND: NodeId = NodeId(0);

    /// The reserved name of the reference node.
    pub const GROUND_NAME: &'static str = "ground";

    /// An empty circuit holding only ground.
    pub fn new() -> Self {
        let mut node_names = Names::default();
        let _ = node_names.push(Self::GROUND_NAME);
        Circuit {
            node_names,
            elements: Vec::new(),
            element_names: Names::default(),
            pins: Vec::new(),
            pin_start: vec![0],
        }
    }

    /// Makes room for `nodes` more nodes and `elements` more elements (with names of about 16
    /// and 24 bytes, three pins each), so that building a large circuit does not grow its
    /// tables step by step.
    pub fn reserve(&mut self, nodes: usize, elements: usize) {
        self.node_names.reserve(nodes, 16);
        self.element_names.reserve(elements, 24);
        self.elements.reserve(elements);
        self.pins.reserve(elements.saturating_mul(3));
        self.pin_start.reserve(elements);
    }

    /// The node called `name`, created if new. `ground` is the reference node. Past
    /// `u32::MAX - 1` nodes every new one gets the same id, which [`Circuit::add`] refuses
    /// ([`CircuitError::TooManyNodes`]).
    pub fn node(&mut self, name: &str) -> NodeId {
        node_id(self.node_names.push(name).unwrap_or_else(|id| id))
    }

    /// The node called `name`, if it exists.
    pub fn find_node(&self, name: &str) -> Option<NodeId> {
        self.node_names.find(name).map(node_id)
    }

    /// The name of `node`.
    pub fn node_name(&self, node: NodeId) -> &str {
        self.node_names.get(node.0 as usize)
    }

    /// Number of nodes, ground included.
    pub fn node_count(&self) -> usize {
        self.node_names.len()
    }

    /// Adds `element` called `name`, its terminals connected to `pins` in order. A wrong
    /// number of pins or a node of another circuit is reported before a repeated name (the
    /// circuit is unchanged on any error).
    pub fn add(
        &mut self,
        name: &str,
        element: impl Element + 'static,
        pins: &[NodeId],
    ) -> Result<ElementId, CircuitError> {
        self.add_shared(name, Arc::new(element), pins)
    }

    /// Adds an already boxed element; see [`Circuit::add`].
    pub fn add_boxed(
        &mut self,
        name: &str,
        element: Box<dyn Element>,
        pins: &[NodeId],
    ) -> Result<ElementId, CircuitError> {
        self.add_shared(name, Arc::from(element), pins)
    }

    /// Adds an element whose model other elements may share: identical devices (a ring's
    /// thousands of equal inverters) then hold one copy of their parameters, built once and
    /// read from cache at every evaluation. Elements are pure functions of their unknowns,
    /// so sharing changes no result; see [`Circuit::add`].
    pub fn add_shared(
        &mut self,
        name: &str,
        element: Arc<dyn Element>,
        pins: &[NodeId],
    ) -> Result<ElementId, CircuitError> {
        let expected = element.terminals().len();
        if pins.len() != expected {
            return Err(CircuitError::PinCount {
                element: name.to_string(),
                expected,
                found: pins.len(),
            });
        }
        if pins.iter().any(|p| p.0 == u32::MAX) {
            return Err(CircuitError::TooManyNodes(name.to_string()));
        }
        if pins.iter().any(|p| p.0 as usize >= self.node_names.len()) {
            return Err(CircuitError::ForeignNode(name.to_string()));
        }
        // Adding the name finds a duplicate too (one hash and probe per element).
        let id = self
            .element_names
            .push(name)
            .map_err(|_| CircuitError::DuplicateElement(name.to_string()))?;
        self.elements.push(element);
        self.pins.extend_from_slice(pins);
        self.pin_start.push(self.pins.len());
        Ok(ElementId(id))
    }

    /// Replaces the element `id` by `element`, keeping its name and pins (a device rebuilt
    /// from an adjusted card, say). The new element must have as many terminals.
    pub fn replace(
        &mut self,
        id: ElementId,
        element: Box<dyn Element>,
    ) -> Result<(), CircuitError> {
        if id.0 >= self.elements.len() {
            return Err(CircuitError::ForeignNode(format!("element #{}", id.0)));
        }
        let found = self.element_pins(id).len();
        if element.terminals().len() != found {
            return Err(CircuitError::PinCount {
                element: self.element_name(id).to_string(),
                expected: element.terminals().len(),
                found,
            });
        }
        self.elements[id.0] = Arc::from(element);
        Ok(())
    }

    /// The element called `name`, if it exists.
    pub fn find_element(&self, name: &str) -> Option<ElementId> {
        self.element_names.find(name).map(ElementId)
    }

    /// The name of an element.
    pub fn element_name(&self, id: ElementId) -> &str {
        self.element_names.get(id.0)
    }

    /// The nodes an element's terminals connect to, in terminal order.
    pub fn element_pins(&self, id: ElementId) -> &[NodeId] {
        &self.pins[self.pin_start[id.0]..self.pin_start[id.0 + 1]]
    }

    /// The terminal names of an element.
    pub fn element_terminals(&self, id: ElementId) -> &'static [&'static str] {
        self.elements[id.0].terminals()
    }

    /// The kind of an element, such as `"resistor"`.
    pub fn element_kind(&self, id: ElementId) -> &'static str {
        self.elements[id.0].kind()
    }

    /// Every element, in insertion order.
    pub fn elements(&self) -> impl Iterator<Item = ElementId> {
        (0..self.elements.len()).map(ElementId)
    }

    /// Every node except ground, in creation order.
    pub fn nodes(&self) -> impl Iterator<Item = NodeId> {
        (1..self.node_names.len()).map(node_id)
    }

    /// Number of elements.
    pub fn element_count(&self) -> usize {
        self.elements.len()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::elements::Resistor;

    #[test]
    fn names_are_found_after_the_table_grows_and_repeats_are_refused() {
        let mut c = Circuit::new();
        let nodes: Vec<NodeId> = (0..5000).map(|i| c.node(&format!("n{i}"))).collect();
        assert_eq!(c.node("ground"), Circuit::GROUND);
        assert_eq!(c.node("n1234"), nodes[1234]);
        assert_eq!(c.node_count(), 5001);
        for (i, &node) in nodes.iter().enumerate() {
            assert_eq!(c.node_name(node), format!("n{i}"));
            assert_eq!(c.find_node(&format!("n{i}")), Some(node));
        }
        assert_eq!(c.find_node("n5000"), None);
        // A name that is a prefix or a concatenation of others is its own name.
        assert_eq!(c.find_node("n1"), Some(nodes[1]));
        assert_eq!(c.find_node("n1n2"), None);

        c.reserve(0, 3);
        let r = c
            .add("r", Resistor::new(1.0), &[nodes[0], nodes[1]])
            .unwrap();
        let pins = [nodes[1], Circuit::GROUND];
        let s = c.add("s", Resistor::new(2.0), &pins).unwrap();
        assert_eq!(
            c.add("r", Resistor::new(3.0), &[nodes[2], nodes[3]]),
            Err(CircuitError::DuplicateElement("r".into()))
        );
        // A refused element leaves nothing behind.
        assert!(matches!(
            c.add("t", Resistor::new(3.0), &[nodes[2]]),
            Err(CircuitError::PinCount { .. })
        ));
        assert_eq!(c.find_element("t"), None);
        assert_eq!(c.element_count(), 2);
        assert_eq!(
            (c.find_element("r"), c.find_element("s")),
            (Some(r), Some(s))
        );
        assert_eq!(c.element_name(s), "s");
        assert_eq!(c.element_pins(r), &[nodes[0], nodes[1]]);
        assert_eq!(c.element_pins(s), &pins);
    }
}
