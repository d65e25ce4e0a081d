//! Building a circuit through the Rust API: named nodes, named elements and their pins.

use crate::element::Element;
use std::collections::HashMap;
use std::fmt;

/// A node of a [`Circuit`]. [`Circuit::GROUND`] is the reference node at 0 V.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct NodeId(pub(crate) usize);

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
        }
    }
}

impl std::error::Error for CircuitError {}

pub(crate) struct Entry {
    pub(crate) name: String,
    pub(crate) element: Box<dyn Element>,
    pub(crate) pins: Vec<NodeId>,
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
    node_names: Vec<String>,
    node_lookup: HashMap<String, NodeId>,
    pub(crate) entries: Vec<Entry>,
    element_lookup: HashMap<String, ElementId>,
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
        let mut node_lookup = HashMap::new();
        node_lookup.insert(Self::GROUND_NAME.to_string(), Self::GROUND);
        Circuit {
            node_names: vec![Self::GROUND_NAME.to_string()],
            node_lookup,
            entries: Vec::new(),
            element_lookup: HashMap::new(),
        }
    }

    /// The node called `name`, created if new. `ground` is the reference node.
    pub fn node(&mut self, name: &str) -> NodeId {
        if let Some(&id) = self.node_lookup.get(name) {
            return id;
        }
        let id = NodeId(self.node_names.len());
        self.node_names.push(name.to_string());
        self.node_lookup.insert(name.to_string(), id);
        id
    }

    /// The node called `name`, if it exists.
    pub fn find_node(&self, name: &str) -> Option<NodeId> {
        self.node_lookup.get(name).copied()
    }

    /// The name of `node`.
    pub fn node_name(&self, node: NodeId) -> &str {
        &self.node_names[node.0]
    }

    /// Number of nodes, ground included.
    pub fn node_count(&self) -> usize {
        self.node_names.len()
    }

    /// Adds `element` called `name`, its terminals connected to `pins` in order.
    pub fn add(
        &mut self,
        name: &str,
        element: impl Element + 'static,
        pins: &[NodeId],
    ) -> Result<ElementId, CircuitError> {
        self.add_boxed(name, Box::new(element), pins)
    }

    /// Adds an already boxed element; see [`Circuit::add`].
    pub fn add_boxed(
        &mut self,
        name: &str,
        element: Box<dyn Element>,
        pins: &[NodeId],
    ) -> Result<ElementId, CircuitError> {
        if self.element_lookup.contains_key(name) {
            return Err(CircuitError::DuplicateElement(name.to_string()));
        }
        let expected = element.terminals().len();
        if pins.len() != expected {
            return Err(CircuitError::PinCount {
                element: name.to_string(),
                expected,
                found: pins.len(),
            });
        }
        if pins.iter().any(|p| p.0 >= self.node_names.len()) {
            return Err(CircuitError::ForeignNode(name.to_string()));
        }
        let id = ElementId(self.entries.len());
        self.entries.push(Entry {
            name: name.to_string(),
            element,
            pins: pins.to_vec(),
        });
        self.element_lookup.insert(name.to_string(), id);
        Ok(id)
    }

    /// Replaces the element `id` by `element`, keeping its name and pins (a device rebuilt
    /// from an adjusted card, say). The new element must have as many terminals.
    pub fn replace(
        &mut self,
        id: ElementId,
        element: Box<dyn Element>,
    ) -> Result<(), CircuitError> {
        let Some(entry) = self.entries.get_mut(id.0) else {
            return Err(CircuitError::ForeignNode(format!("element #{}", id.0)));
        };
        if element.terminals().len() != entry.pins.len() {
            return Err(CircuitError::PinCount {
                element: entry.name.clone(),
                expected: element.terminals().len(),
                found: entry.pins.len(),
            });
        }
        entry.element = element;
        Ok(())
    }

    /// The element called `name`, if it exists.
    pub fn find_element(&self, name: &str) -> Option<ElementId> {
        self.element_lookup.get(name).copied()
    }

    /// The name of an element.
    pub fn element_name(&self, id: ElementId) -> &str {
        &self.entries[id.0].name
    }

    /// The nodes an element's terminals connect to, in terminal order.
    pub fn element_pins(&self, id: ElementId) -> &[NodeId] {
        &self.entries[id.0].pins
    }

    /// The terminal names of an element.
    pub fn element_terminals(&self, id: ElementId) -> &'static [&'static str] {
        self.entries[id.0].element.terminals()
    }

    /// The kind of an element, such as `"resistor"`.
    pub fn element_kind(&self, id: ElementId) -> &'static str {
        self.entries[id.0].element.kind()
    }

    /// Every element, in insertion order.
    pub fn elements(&self) -> impl Iterator<Item = ElementId> {
        (0..self.entries.len()).map(ElementId)
    }

    /// Every node except ground, in creation order.
    pub fn nodes(&self) -> impl Iterator<Item = NodeId> {
        (1..self.node_names.len()).map(NodeId)
    }

    /// Number of elements.
    pub fn element_count(&self) -> usize {
        self.entries.len()
    }
}
